"""The scan on real music it was never tuned on (run by hand: python tests/benchmarks/eval_scan_unseen.py [FOLDER]).

The scan's parameters were tuned on the six pieces of ``tests/realmusic.py``
(``PIECES``).  This script renders OTHER public-domain scores of music21's
bundled corpus (:data:`UNSEEN`: three more Bach chorales, a Clara Schumann
polonaise and a Chopin mazurka on piano, a Mozart string-quartet andante, a
Schubert song with piano, a fast jig on flute, a slow Corelli grave for two
violins and cello), plus a drum kit at another tempo than the set's and a
white-noise track, with the same machinery as the set (``score_notes``,
``_render``, ``_write``; the soundfont's tuning and attack latency measured
on every (instrument, MIDI note) used, ``soundfont_tuning`` and
``soundfont_latency``) and scans them on the SAME rig as the set (the rig
file of ``realmusic.build(BASE)``).

The pieces are rendered as written -- a user's library is not moved to the
tube's best key -- plus, for :data:`BEST_KEY`, a copy in the whole-semitone
key that holds most of its notes on the modes (``realmusic._key_shift``), to
have some on-mode music.

Per track it prints: the score, the share of time a note is held on a
readable mode (ground truth, ``realmusic.held_share``), frame-level mode-hit
precision/recall/F1 counted as ``realmusic.evaluate`` counts them
(``realmusic.map_figures``), mir_eval multipitch precision/recall, the raw
pitch/chroma accuracy of the dominant line against the highest sounding note
(mir_eval.melody), the suggested transposition beside the ground truth's best
one (``realmusic.shift_profile``, 25-cent grid) and the held share the
suggestion would really give; for the best-key copies, the score the
suggestion promises beside the score of the copy (``--shifted DIR``: beside
the piece really shifted by the suggestion, :func:`promises`).  Overall: Spearman(score,
held share) (scipy), pooled mode-hit F1, pooled mir_eval multipitch, the
held-note pitch error (``realmusic.held_note_errors``), the drum and noise
scores; per passage, the score beside the ground truth's held share over the
passage.  ``--cli`` also runs
``python -m showkit scan FOLDER/tracks --rig RIG`` as a user would.

Renders are cached in FOLDER (default: a folder under the temp dir);
``--base`` is the set's folder the rig is taken from (read only when it is
already built).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve()
sys.path.insert(0, str(HERE.parents[1]))          # tests/ (realmusic)
if not os.environ.get("PYTHONPATH"):
    sys.path.insert(0, str(HERE.parents[2]))      # the repository

import numpy as np  # noqa: E402
import realmusic as rm  # noqa: E402

#: Bumped whenever the rendered set changes (invalidates the cache in FOLDER).
VERSION = 1
P, O, V, VA, C, S, F = rm.PIANO, rm.ORGAN, rm.VIOLIN, rm.VIOLA, rm.CELLO, rm.STRINGS, rm.FLUTE

#: Scores of music21's corpus not in realmusic.PIECES; tempo in quarter notes per minute.
UNSEEN = (
    rm.Piece("chorale269_organ", "bach/bwv269", 66.0, 30.0, (O,) * 4, "chorale, organ"),
    rm.Piece("chorale347_organ", "bach/bwv347", 60.0, 30.0, (O,) * 4, "chorale, organ"),
    rm.Piece("chorale40_strings", "bach/bwv40.8", 60.0, 30.0, (S,) * 4, "chorale, string ensemble"),
    rm.Piece("polonaise_piano", "schumann_clara/polonaise_op1n1", 100.0, 24.0, (P, P),
             "keyboard polonaise (Clara Schumann op. 1 no. 1)"),
    rm.Piece("mazurka_piano", "chopin/mazurka06-2", 132.0, 24.0, (P, P), "keyboard mazurka, lively (Chopin)"),
    rm.Piece("quartet_k155_strings", "mozart/k155/movement2", 72.0, 30.0, (V, V, VA, C),
             "string quartet, andante (Mozart K. 155)"),
    rm.Piece("lindenbaum_song", "schubert/Lindenbaum", 90.0, 40.0, (F, P, P),
             "song with piano: voice on flute (Schubert, Der Lindenbaum)", (100, 70, 70)),
    rm.Piece("jig_flute", "ryansMammoth/BarneyBrallagansJig", 180.0, 20.0, (F,), "jig, fast, flute"),
    rm.Piece("grave_strings", "corelli/opus3no1/1grave", 50.0, 30.0, (V, V, C),
             "slow trio sonata grave (Corelli op. 3 no. 1)"),
)
#: Pieces also rendered in their best key on the rig (realmusic._key_shift).
BEST_KEY = ("chorale269_organ", "lindenbaum_song", "grave_strings")
DRUM_BPM, DRUM_S, NOISE_S = 132.0, 20.0, 20.0


def build(folder: Path, base: rm.Corpus) -> dict:
    """Render (or load from ``folder``) the unseen set; returns ``{"tracks", "keys", "tuning", "latency"}``."""
    from showkit.analysis.pitches import ModeTable
    from showkit.physics.modes import find_modes
    from showkit.rigfile import load_rig

    audio_dir = folder / "tracks"
    manifest = folder / "unseen.json"
    rig_text = base.rig_path.read_text()
    if manifest.exists():
        d = json.loads(manifest.read_text())
        if (d.get("version") == VERSION and d.get("rig") == rig_text
                and all((audio_dir / t["path"]).exists() for t in d["tracks"])):
            return {"tracks": {t["name"]: rm.Track.from_json(t, audio_dir) for t in d["tracks"]},
                    "keys": d["keys"], "tuning": d["tuning"], "latency": d["latency"]}
    missing = rm.have_tools()
    if missing:
        raise RuntimeError(missing)
    audio_dir.mkdir(parents=True, exist_ok=True)
    table = ModeTable.from_modes(find_modes(load_rig(base.rig_path).model))
    raw = {pc.name: rm.score_notes(pc) for pc in UNSEEN}
    pairs = set()
    for notes in raw.values():   # every note the score and its key moves (-6..+5) may use
        for prog in {p for p, *_ in notes}:
            ms = [m for p, m, *_ in notes if p == prog]
            pairs |= {(prog, m) for m in range(min(ms) - 6, max(ms) + 6)}
    t = time.perf_counter()
    tuning = rm.soundfont_tuning(pairs, rm._held_notes(pairs, folder))
    latency = rm.soundfont_latency(pairs, rm._held_notes(pairs, folder, rm.LATENCY_STEP_S))
    (folder / "held_notes.wav").unlink(missing_ok=True)
    print(f"soundfont tuning and latency of {len(pairs)} notes measured in {time.perf_counter() - t:.0f} s")
    tracks, keys = {}, {}
    versions = [(pc, 0, pc.name) for pc in UNSEEN]
    for pc in UNSEEN:
        if pc.name in BEST_KEY:
            keys[pc.name] = rm._key_shift(raw[pc.name], table, tuning)
            versions.append((pc, keys[pc.name], f"{pc.name}_key{keys[pc.name]:+d}"))
    for pc, k, name in versions:
        notes = [(p, m + k, a, b, v) for p, m, a, b, v in raw[pc.name]]
        path = audio_dir / f"{name}.wav"
        rm._write(path, rm._render(notes, pc.seconds, path))
        kind = pc.kind + (f", moved {k:+d} semitones to its best key on the rig" if name != pc.name else
                          ", as written")
        tracks[name] = rm._track(name, path, pc.seconds, rm._late(notes, latency), rm._freqs(notes, tuning),
                                 kind)
    path = audio_dir / "drums132.wav"
    rm._write(path, rm._render([], DRUM_S, path, drums=rm.drum_notes(DRUM_S, DRUM_BPM)))
    tracks["drums132"] = rm._track("drums132", path, DRUM_S, [], np.zeros(0),
                                   f"GM drum kit at {DRUM_BPM:g} bpm, no pitched notes")
    path = audio_dir / "white_noise.wav"
    rm._write(path, np.random.default_rng(12).standard_normal(round(NOISE_S * rm.RATE_HZ)))
    tracks["white_noise"] = rm._track("white_noise", path, NOISE_S, [], np.zeros(0),
                                      "white noise (Gaussian, seed 12)")
    for p in audio_dir.glob("*.mid"):
        p.unlink()
    manifest.write_text(json.dumps({"version": VERSION, "rig": rig_text, "keys": keys, "tuning": tuning,
                                    "latency": latency, "tracks": [t.to_json() for t in tracks.values()]},
                                   indent=1))
    return {"tracks": tracks, "keys": keys, "tuning": tuning, "latency": latency}


def held_at(tr: rm.Track, table, cents: float) -> float:
    """Ground-truth held-on-mode share of the track with every note moved by ``cents``."""
    moved = rm.Track(tr.name, tr.path, tr.duration_s, tr.onset_s, tr.offset_s, tr.midi,
                     tr.freq_hz * 2.0 ** (cents / 1200.0))
    return rm.held_share(moved, table)


def evaluate(tracks: dict, base: rm.Corpus, progress=None) -> dict:
    """Scan every track on the set's rig and measure it against its ground truth."""
    from scipy.stats import spearmanr

    from showkit.analysis import scan as scan_mod

    import mir_eval

    rig = base.rig()
    table = scan_mod.mode_table(rig)
    res: dict = {"tracks": {}}
    tot, strict = np.zeros(3, int), np.zeros(3, int)
    mp_t, mp_ref, mp_est, held_errs, held_n = [], [], [], [], 0
    for name, tr in tracks.items():
        if progress:
            progress(name)
        scan = scan_mod.scan_track(rig, tr.path)
        m = rm.engine_map(rig, base.rig_path, tr.path)
        row = {"score": scan["score"], "held_share": rm.held_share(tr, table),
               "transpose_cents": 100.0 * (scan["transpose_semitones"] or 0.0),
               "transpose_score": scan["transpose_score"], "kind": tr.kind,
               "passages": [(p["start_s"], p["end_s"], p["score"]) for p in scan["passages"]]}
        row.update(rm.map_figures(tr, table, m))
        strict += [row["hits_strict"][k] for k in ("tp", "fp", "fn")]
        tot += [row["hits"][k] for k in ("tp", "fp", "fn")]
        row["passage_held"] = [rm.held_share(tr, table, start_s=a, end_s=b) for a, b, _ in row["passages"]]
        if tr.freq_hz.size:
            times = m["times_s"]
            mp_t.append(times + (mp_t[-1][-1] + 1.0 if mp_t else 0.0))
            mp_ref += rm.sounding_hz(tr, 0.0, times)[1]
            mp_est += list(m["notes_hz"])
            errs, n = rm.held_note_errors(tr, m)
            held_errs += errs
            held_n += n
            prof = rm.shift_profile(tr, table)
            best = int(np.argmax(prof))
            # the best shift of the ground truth; ties go to the smallest move
            ties = np.nonzero(prof >= prof[best] - 1e-9)[0]
            best = int(ties[np.argmin(np.abs(rm.SHIFT_GRID_CENTS[ties]))])
            row["truth_best_cents"] = float(rm.SHIFT_GRID_CENTS[best])
            row["truth_best_share"] = float(prof[best])
            row["held_at_suggested"] = held_at(tr, table, row["transpose_cents"])
        res["tracks"][name] = row
    res["hits_pooled"] = rm._prf(*tot)
    res["hits_pooled_strict"] = rm._prf(*strict)
    t = np.concatenate(mp_t)
    mp = mir_eval.multipitch.evaluate(t, mp_ref, t, mp_est)
    res["multipitch_pooled"] = {k: float(mp[k]) for k in ("Precision", "Recall", "Accuracy", "Chroma Accuracy")}
    res["held_notes"] = {"frames": held_n, "found": len(held_errs) / held_n if held_n else 0.0,
                         "median_cents": float(np.median(held_errs)) if held_errs else float("nan"),
                         "p90_cents": float(np.percentile(held_errs, 90)) if held_errs else float("nan")}
    rpa = [t["melody"]["Raw Pitch Accuracy"] for t in res["tracks"].values() if "melody" in t]
    res["rpa_mean"] = float(np.mean(rpa))
    # transposition: as-written pieces whose ground truth gains >= 0.1 of held share at its best shift
    moves = {n: t for n, t in res["tracks"].items() if "truth_best_cents" in t and "_key" not in n
             and t["truth_best_share"] >= t["held_share"] + 0.1}
    res["transposition"] = {n: {"suggested_cents": t["transpose_cents"], "truth_best_cents": t["truth_best_cents"],
                                "within_25c": abs(t["transpose_cents"] - t["truth_best_cents"]) <= 25.0}
                            for n, t in moves.items()}
    names = list(res["tracks"])
    music = [n for n in names if tracks[n].freq_hz.size]
    for key, group in (("spearman_all", names), ("spearman_music", music),
                       ("spearman_as_written", [n for n in music if "_key" not in n])):
        sc = [res["tracks"][n]["score"] for n in group]
        hs = [res["tracks"][n]["held_share"] for n in group]
        res[key] = float(spearmanr(hs, sc).statistic) if np.ptp(sc) > 0 and np.ptp(hs) > 0 else float("nan")
    return res


def report(res: dict) -> str:
    L = rm.pooled_lines(res)
    L.append(f"dominant line, raw pitch accuracy, mean over pitched tracks: {res['rpa_mean']:.2f}")
    L.append(f"{'track':30s} {'score':>5s} {'held':>5s} {'hitP':>5s} {'hitR':>5s} {'hitF1':>5s} {'gt/fr':>5s} "
             f"{'map/fr':>6s} {'mpP':>5s} {'mpR':>5s} {'RPA':>5s} {'RCA':>5s} {'transp':>6s} {'->held':>6s} "
             f"{'gtbest':>6s} {'->held':>6s}")
    nan = float("nan")
    for n, t in res["tracks"].items():
        mp, mel = t.get("multipitch", {}), t.get("melody", {})
        L.append(f"{n:30s} {t['score']:5.1f} {t['held_share']:5.2f} {t['hits']['precision']:5.2f} "
                 f"{t['hits']['recall']:5.2f} {t['hits']['f1']:5.2f} {t['truth_hits_per_frame']:5.2f} "
                 f"{t['map_hits_per_frame']:6.2f} {mp.get('Precision', nan):5.2f} {mp.get('Recall', nan):5.2f} "
                 f"{mel.get('Raw Pitch Accuracy', nan):5.2f} {mel.get('Raw Chroma Accuracy', nan):5.2f} "
                 f"{t['transpose_cents']:+6.0f} {t.get('held_at_suggested', nan):6.2f} "
                 f"{t.get('truth_best_cents', nan):+6.0f} {t.get('truth_best_share', nan):6.2f}")
    L.append("(held: share of time a note >= 0.2 s sits on a readable mode; transp: the scan's suggestion, "
             "cents, ->held: the true held share it gives; gtbest: the ground truth's best shift on a "
             "25-cent grid and its held share)")
    L.append(f"Spearman(score, held share): all tracks {res['spearman_all']:.2f}; pitched music only "
             f"{res['spearman_music']:.2f}; pieces as written only {res['spearman_as_written']:.2f}")
    tr = res["transposition"]
    L.append(f"transposition, as-written pieces gaining >= 0.1 held share at the truth's best shift: "
             f"{sum(v['within_25c'] for v in tr.values())} of {len(tr)} suggested within 25 c of it: "
             + ", ".join(f"{n} {v['suggested_cents']:+.0f}/{v['truth_best_cents']:+.0f}" for n, v in tr.items()))
    promised = []
    for n, t in res["tracks"].items():
        copy = next((c for c in res["tracks"] if c.startswith(n + "_key")), None)
        if copy is not None:
            promised.append(f"{n} suggests {t['transpose_cents']:+.0f} c -> {t['transpose_score']:.1f}; "
                            f"rendered at {copy[len(n) + 4:]} st it scores {res['tracks'][copy]['score']:.1f}")
    L.append("the suggestion's promised score vs the piece rendered in its best key: " + "; ".join(promised))
    L.append("passages (score / ground-truth held share):")
    for n, t in res["tracks"].items():
        L.append(f"  {n:30s} " + "  ".join(f"{a:.1f}-{b:.1f} s {s_:.0f}/{h:.2f}"
                                           for (a, b, s_), h in zip(t["passages"], t["passage_held"])))
    for n in ("drums132", "white_noise"):
        t = res["tracks"][n]
        L.append(f"{n}: score {t['score']:.1f}, map hits per frame {t['map_hits_per_frame']:.2f}")
    return "\n".join(L)


def render_bent(notes, seconds: float, path: Path, cents: float) -> np.ndarray:
    """The notes rendered as ``realmusic._render`` renders them, every note bent by ``cents``.

    The pitch wheel's range is set to +-12 semitones (RPN 0, the pitch-bend
    sensitivity of the General MIDI spec, from memory; one event every 10 ms,
    the notes 60 ms late so that the wheel is set before them), so the same
    samples play at the same tempo, moved by the shift: the shift really
    applied to the same performance.  fluidsynth plays a bend of 305 c as
    about 302 c (measured on one flute note by the FFT peak).
    """
    import subprocess

    import pretty_midi
    import soundfile as sf

    pm = pretty_midi.PrettyMIDI(initial_tempo=120.0)
    by_program: dict = {}
    for program, midi, on, off, vel in notes:
        if program not in by_program:
            ins = pretty_midi.Instrument(program=program)
            for k, (num, val) in enumerate(((101, 0), (100, 0), (6, 12), (38, 0))):
                ins.control_changes.append(pretty_midi.ControlChange(num, val, 0.01 * (k + 1)))
            ins.pitch_bends.append(pretty_midi.PitchBend(int(np.clip(round(8192 * cents / 1200.0), -8192, 8191)),
                                                         0.05))
            by_program[program] = ins
        by_program[program].notes.append(pretty_midi.Note(int(vel), int(midi), float(on) + 0.06,
                                                          float(off) + 0.06))
    pm.instruments.extend(by_program.values())
    mid, raw = path.with_suffix(".mid"), path.with_suffix(".raw.wav")
    pm.write(str(mid))
    subprocess.run(["fluidsynth", "-ni", "-q", "-R", "0", "-C", "0", "-g", "0.5", "-r", str(rm.RATE_HZ),
                    "-F", str(raw), str(rm.SOUNDFONT), str(mid)], check=True, capture_output=True, timeout=300)
    x, _ = sf.read(str(raw), dtype="float32", always_2d=True)
    raw.unlink()
    mid.unlink()
    n = round(seconds * rm.RATE_HZ)
    x = x.mean(axis=1)
    return np.pad(x[:n], (0, max(0, n - x.size)))


def promises(res: dict, tracks: dict, base: rm.Corpus, folder: Path) -> str:
    """The score each suggestion promises beside the score of the piece really shifted by it, two ways.

    For every as-written piece with a suggestion, and for the best-key pieces at their key's shift:
    the same MIDI performance re-rendered with the whole shift as a pitch bend (:func:`render_bent`)
    and the recording shifted by librosa's pitch shifter (``transpose.render_preview``), each scanned.
    Renders go to ``folder`` (any writable folder).
    """
    from showkit.analysis import scan as scan_mod
    from showkit.analysis.transpose import render_preview

    rig = base.rig()
    pieces = {pc.name: pc for pc in UNSEEN}
    keys = {n[:n.index("_key")]: int(n[n.index("_key") + 4:]) for n in tracks if "_key" in n}
    folder.mkdir(parents=True, exist_ok=True)
    L = ["promised score vs the piece really shifted (same performance with a pitch bend / the recording "
         "through the pitch shifter):"]
    errs: dict = {"bend": [], "shifter": []}
    for n, t in res["tracks"].items():
        if n not in pieces:
            continue
        shifts = ([t["transpose_cents"]] if t["transpose_cents"] else []) + ([100.0 * keys[n]] if n in keys else [])
        if not shifts:
            continue
        work = scan_mod._analyse(rig, tracks[n].path)
        for c in shifts:
            bent = folder / f"{n}_bend{c:+.0f}c.wav"
            if not bent.exists():
                rm._write(bent, render_bent(rm.score_notes(pieces[n]), pieces[n].seconds, bent, c))
            shifted = folder / f"{n}_shifter{c:+.0f}c.wav"
            if not shifted.exists():
                render_preview(tracks[n].path, 0.0, tracks[n].duration_s, c / 100.0, shifted)
            promised = work.promised_at(c)[0]
            got = {k: scan_mod._analyse(rig, p).score_at(0.0)[0] for k, p in (("bend", bent), ("shifter", shifted))}
            line = (f"  {n:22s} {c:+5.0f} c: promised {promised:5.1f} (the one shift's score "
                    f"{work.score_at(c)[0]:5.1f}); bent {got['bend']:5.1f}, pitch shifter {got['shifter']:5.1f}")
            if c == t["transpose_cents"]:
                for k in errs:
                    errs[k].append(promised - got[k])
            else:
                line += f"; the MIDI copy in that key {res['tracks'][f'{n}_key{keys[n]:+d}']['score']:5.1f}"
            L.append(line)
    for k, e in errs.items():
        if e:
            L.append(f"  promised - {k}, over the suggestions: mean {np.mean(e):+.1f}, mean |.| "
                     f"{np.mean(np.abs(e)):.1f}, largest |.| {np.max(np.abs(e)):.1f} points")
    return "\n".join(L)


def run_cli(folder: Path, rig_path: Path) -> str:
    """``python -m showkit scan FOLDER/tracks --rig RIG --no-cache`` as a user would run it."""
    cmd = [sys.executable, "-m", "showkit", "scan", str(folder / "tracks"), "--rig", str(rig_path), "--no-cache"]
    t = time.perf_counter()
    r = subprocess.run(cmd, capture_output=True, text=True, timeout=1800, env=dict(os.environ), check=False)
    return (f"$ showkit scan {folder / 'tracks'} --rig {rig_path} --no-cache   (exit {r.returncode}, "
            f"{time.perf_counter() - t:.0f} s)\n{r.stdout}{r.stderr}")


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("folder", nargs="?", default=os.path.join(tempfile.gettempdir(), "showkit-unseen"))
    ap.add_argument("--base", default=os.path.join(tempfile.gettempdir(), "showkit-realmusic"),
                    help="folder of the tuned set (tests/realmusic.py) whose rig is used")
    ap.add_argument("--json", metavar="FILE")
    ap.add_argument("--cli", action="store_true", help="also run showkit scan on the folder")
    ap.add_argument("--shifted", metavar="DIR",
                    help="also render every suggestion really applied (pitch bend, pitch shifter) into DIR "
                         "and compare the promised score with theirs")
    args = ap.parse_args()
    os.environ.setdefault("SHOWKIT_CACHE_DIR", tempfile.mkdtemp(prefix="showkit-eval-cache-"))
    folder = Path(args.folder)
    folder.mkdir(parents=True, exist_ok=True)
    base = rm.build(args.base)
    t = time.perf_counter()
    built = build(folder, base)
    print(f"unseen set ready in {time.perf_counter() - t:.1f} s ({folder}); rig {base.rig_path}")
    table = base.table()
    for name, tr in built["tracks"].items():
        print(f"  {name:30s} {tr.duration_s:5.1f} s {tr.freq_hz.size:4d} notes  held on modes "
              f"{rm.held_share(tr, table):.2f}  {tr.kind}")
    t = time.perf_counter()
    res = evaluate(built["tracks"], base, progress=lambda n: print(f"  scanning {n}", file=sys.stderr))
    print(f"scan + evaluation: {time.perf_counter() - t:.1f} s")
    print(report(res))
    if args.shifted:
        print(promises(res, built["tracks"], base, Path(args.shifted)))
    if args.cli:
        print(run_cli(folder, base.rig_path))
    if args.json:
        Path(args.json).write_text(json.dumps(res, indent=1, default=lambda o: np.asarray(o).tolist()))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
