"""A learned multi-pitch model as a peer of the scan on the real-music sets (run by hand; measurement only).

The peer is the published model of R. M. Bittner, J. J. Bosch, D. Rubinstein,
G. Meseguer-Brocal and S. Ewert, "A lightweight instrument-agnostic model for
polyphonic note transcription and multipitch estimation", ICASSP 2022 (PyPI
``basic-pitch``, Apache-2.0), run through the ONNX copy of its weights that
the package ships, on onnxruntime.  Nothing here is a dependency of showkit:
the script runs only where those optional packages are installed, and
pytest does not collect it (``tests/benchmarks`` is ignored).

Set-up (a separate, plain virtual environment; on Linux the package's wheel
asks for a large training framework that its ONNX model does not need, hence
``--no-deps``)::

    python -m venv PEERVENV
    PEERVENV/bin/pip install numpy scipy librosa soundfile mir_eval pretty_midi music21 resampy onnxruntime
    PEERVENV/bin/pip install --no-deps basic-pitch

Run (from the repository root; the sets must be built already, by
``eval_scan_realmusic.py FOLDER`` and ``eval_scan_unseen.py UNSEEN --base FOLDER``)::

    PYTHONPATH=$PWD PEERVENV/bin/python tests/benchmarks/peer_learned_pitch.py FOLDER UNSEEN \\
        --scan-python PYTHON_WITH_SHOWKIT [--json FILE]

Per track of the six scored pieces (``realmusic.PIECES``) and of the pitched
tracks of the unseen set, against the ground truth of ``tests/realmusic.py``
(the notes at the soundfont's measured tuning, latency-timed):

* mir_eval.multipitch precision/recall (Bay, Ehmann & Downie, ISMIR 2009) of
  the peer's frame-level notes (:data:`VARIANTS`), at its own frame times
  (86 per second): ``events`` -- its note events (the package's own note
  creation with its defaults: onset threshold 0.5, frame threshold 0.3, notes
  >= 127.7 ms, its "melodia trick"), each note at its MIDI pitch moved by its
  per-frame pitch bend (1/3-semitone steps of the contour output), and
  ``frames>=T`` -- every note-posteriorgram bin >= T (0.3, the package's frame
  threshold, and 0.5) in a frame (no onsets, no minimum length), placed on
  the best of the three contour bins of that semitone;
* mir_eval.melody raw pitch / raw chroma accuracy (Poliner et al., IEEE TASLP
  15(4), 2007) against the highest sounding note (``realmusic.melody``) of
  (a) the highest note per frame, (b) the project's Viterbi line,
  ``showkit.analysis.pitches.dominant_pitch`` (DEVELOPERS.md Methods §8b), run
  on the peer's notes with the note posteriorgram as the energy, and (c) the
  strongest note (largest posteriorgram);
* the share of voiced reference frames whose top note lies within 50 cents of
  one of the frame's notes (the ceiling of any line picked from those notes);
* CPU time per minute of audio on one core (OMP/onnxruntime threads = 1;
  ``time.process_time`` of decoding, inference and note creation; over all
  tracks and without the first, which carries one-time start-up costs), wall
  time (noisy on a shared machine), the import time of the packages and the
  model's load time, and the worker's peak resident memory (``ru_maxrss``).

With ``--scan-python`` the same figures of the scan in this tree are measured
by that interpreter (the one showkit runs in): ``scan_track`` timed on one
core (``threads=1``, OMP threads = 1, no cache; all tracks timed before any
evaluation, so that the peak memory is the scan's), its map's ``notes_hz`` and
``dominant_hz`` measured by ``realmusic.map_figures`` as the project's
evaluation does, on the scan's own frame times.  Each side runs in a fresh
worker process so that its peak memory and import time are its own.
``--keep DIR`` keeps the peer's raw outputs and reuses them (its cost is then
not measured again).
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
sys.path.insert(0, str(HERE.parent))              # tests/benchmarks/ (eval_scan_unseen)
if not os.environ.get("PYTHONPATH"):
    sys.path.insert(0, str(HERE.parents[2]))      # the repository

#: The peer's note-creation settings: basic_pitch.inference.predict's defaults.
ONSET_THRESHOLD = 0.5
FRAME_THRESHOLD = 0.3
MIN_NOTE_MS = 127.70
#: The peer's frame-level notes measured: (kind, posteriorgram threshold) -- see :func:`peer_notes`.
VARIANTS = {"events": ("events", FRAME_THRESHOLD), "frames>=0.3": ("frames", 0.3), "frames>=0.5": ("frames", 0.5)}
#: Tolerance of "the reference is among the frame's notes", cents (mir_eval's pitch tolerance).
NEAR_CENTS = 50.0
ONE_CORE = {"OMP_NUM_THREADS": "1", "OPENBLAS_NUM_THREADS": "1", "MKL_NUM_THREADS": "1",
            "NUMBA_NUM_THREADS": "1"}


def _rss_mb() -> float:
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0


# ----------------------------------------------------------------------------- the sets

def tracks(corpus_dir: str, unseen_dir: str | None) -> dict:
    """``{set: {name: realmusic.Track}}``: the six scored pieces and the pitched tracks of the unseen set."""
    import realmusic as rm

    base = rm.build(corpus_dir)
    out = {"realmusic": {p.name: base[p.name] for p in rm.PIECES}}
    if unseen_dir:
        import eval_scan_unseen as eu

        built = eu.build(Path(unseen_dir), base)["tracks"]
        out["unseen"] = {n: t for n, t in built.items() if t.freq_hz.size}
    return out


# ----------------------------------------------------------------------------- the peer (its own venv)

def peer_worker(paths: list, out_dir: Path) -> dict:
    """Run the peer on every path (one core); its raw outputs go to ``out_dir/NAME.npz``."""
    t0 = time.perf_counter()
    import onnxruntime as ort
    from basic_pitch import FilenameSuffix, build_icassp_2022_model_path
    from basic_pitch import inference as bi
    from basic_pitch import note_creation as nc
    from basic_pitch.constants import AUDIO_SAMPLE_RATE, FFT_HOP
    import numpy as np

    import_s = time.perf_counter() - t0
    model_path = build_icassp_2022_model_path(FilenameSuffix.onnx)
    t0 = time.perf_counter()
    model = bi.Model(model_path)
    opts = ort.SessionOptions()
    opts.intra_op_num_threads = 1
    opts.inter_op_num_threads = 1
    model.model = ort.InferenceSession(str(model_path), sess_options=opts, providers=["CPUExecutionProvider"])
    load_s = time.perf_counter() - t0
    min_len = int(np.round(MIN_NOTE_MS / 1000 * (AUDIO_SAMPLE_RATE / FFT_HOP)))   # as predict() computes it
    rows = {}
    for path in paths:
        w0, c0 = time.perf_counter(), time.process_time()
        out = bi.run_inference(path, model)
        c1 = time.process_time()
        _, events = nc.model_output_to_notes(out, onset_thresh=ONSET_THRESHOLD, frame_thresh=FRAME_THRESHOLD,
                                             min_note_len=min_len, melodia_trick=True)
        c2, w2 = time.process_time(), time.perf_counter()
        times = nc.model_frames_to_time(out["note"].shape[0])
        ev = np.array([(s, e, p, a) for s, e, p, a, _ in events], float).reshape(-1, 4)
        bends = [np.asarray(b if b is not None else [], float) for *_, b in events]
        np.savez_compressed(out_dir / (Path(path).stem + ".npz"), note=out["note"], onset=out["onset"],
                            contour=out["contour"], times=times, events=ev,
                            bend_lengths=np.array([b.size for b in bends], int),
                            bends=np.concatenate(bends) if bends else np.zeros(0))
        rows[str(path)] = {"infer_cpu_s": c1 - c0, "notes_cpu_s": c2 - c1, "cpu_s": c2 - c0, "wall_s": w2 - w0}
    return {"import_s": import_s, "model_load_s": load_s, "tracks": rows, "peak_rss_mb": _rss_mb(),
            "model": str(model_path.name), "onnxruntime": ort.__version__}


def peer_notes(npz: Path, how: str, threshold: float = FRAME_THRESHOLD):
    """``(times_s, notes_hz (frames, K) NaN-padded, energy (frames, K))`` of a peer output.

    ``how`` = ``"events"``: the note events sounding at each frame, at MIDI pitch + pitch bend;
    ``"frames"``: every note-posteriorgram bin >= ``threshold`` (0-1), at the best of the semitone's three
    contour bins.  The energy is the note posteriorgram at the note's bin (0-1).
    """
    import numpy as np

    d = np.load(npz)
    note, contour, times = d["note"], d["contour"], d["times"]
    frames = note.shape[0]
    if how == "events":
        ev = d["events"]
        starts = np.searchsorted(times, ev[:, 0] - 1e-9)
        ends = np.searchsorted(times, ev[:, 1] - 1e-9)
        lengths = ends - starts
        pitch = ev[:, 2].astype(int)
        # frame index, note index and bend of every (note, frame) cell, without a loop over frames
        idx = np.repeat(np.arange(ev.shape[0]), lengths)
        fr = np.repeat(starts, lengths) + (np.arange(idx.size) - np.repeat(np.cumsum(lengths) - lengths, lengths))
        bend_start = np.cumsum(d["bend_lengths"]) - d["bend_lengths"]
        off = fr - starts[idx]
        has = off < d["bend_lengths"][idx]
        bend = np.where(has, d["bends"][np.minimum(bend_start[idx] + off, max(d["bends"].size - 1, 0))], 0.0)
        semis = pitch[idx] + bend / 3.0
        energy = note[fr, pitch[idx] - 21]
    else:
        fr, b = np.nonzero(note >= threshold)
        c = np.stack([contour[fr, np.clip(3 * b + k, 0, contour.shape[1] - 1)] for k in (-1, 0, 1)], axis=1)
        semis = 21 + b + (np.argmax(c, axis=1) - 1) / 3.0
        energy = note[fr, b]
    hz = 440.0 * 2.0 ** ((semis - 69.0) / 12.0)
    order = np.lexsort((hz, fr))
    fr, hz, energy = fr[order], hz[order], energy[order]
    # drop a note repeated in the same frame (two events of one pitch overlapping)
    keep = np.ones(fr.size, bool)
    keep[1:] = ~((fr[1:] == fr[:-1]) & (np.abs(hz[1:] - hz[:-1]) < 1e-6))
    fr, hz, energy = fr[keep], hz[keep], energy[keep]
    counts = np.bincount(fr, minlength=frames)
    k = max(1, int(counts.max()) if counts.size else 1)
    col = np.arange(fr.size) - np.repeat(np.cumsum(counts) - counts, counts)
    f = np.full((frames, k), np.nan)
    e = np.zeros((frames, k))
    f[fr, col] = hz
    e[fr, col] = energy
    return times, f, e


def line_figures(tr, times, notes_list, lines: dict) -> dict:
    """mir_eval.multipitch of the notes, and mir_eval.melody of each line, against the track's truth."""
    import mir_eval
    import numpy as np
    import realmusic as rm

    _, ref = rm.sounding_hz(tr, 0.0, times)
    mp = mir_eval.multipitch.evaluate(times, ref, times, notes_list)
    row = {"multipitch": {k: float(mp[k]) for k in ("Precision", "Recall", "Accuracy", "Chroma Accuracy")}}
    _, mel = rm.melody(tr, 0.0, times)
    for name, line in lines.items():
        r = mir_eval.melody.evaluate(times, mel, times, np.nan_to_num(line))
        row[name] = {k: float(r[k]) for k in ("Raw Pitch Accuracy", "Raw Chroma Accuracy")}
    voiced = mel > 0
    near = np.array([bool(f.size) and float(np.min(np.abs(1200.0 * np.log2(f / m)))) <= NEAR_CENTS
                     for f, m in zip(notes_list, mel) if m > 0] or [False])
    row["ref_in_notes"] = float(near.mean()) if voiced.any() else float("nan")
    row["notes_per_frame"] = float(np.mean([f.size for f in notes_list]))
    return row


def peer_figures(tr, npz: Path, variant: str) -> dict:
    """The figures of one peer variant (:data:`VARIANTS`) on one track: its notes, and three lines picked
    from them -- the highest note, the strongest (largest posteriorgram) and showkit's Viterbi line."""
    import numpy as np

    from showkit.analysis.pitches import dominant_pitch

    times, f, e = peer_notes(npz, *VARIANTS[variant])
    ok = np.isfinite(f)
    notes_list = [row[k] for row, k in zip(f, ok)]
    rows = np.arange(f.shape[0])
    top = np.where(ok.any(axis=1), np.max(np.where(ok, f, -np.inf), axis=1), 0.0)
    strong = np.where(ok.any(axis=1), f[rows, np.argmax(np.where(ok, e, -1.0), axis=1)], 0.0)
    return line_figures(tr, times, notes_list, {"highest": top, "strongest": strong,
                                                "viterbi": dominant_pitch(f, e)})


# ----------------------------------------------------------------------------- the scan (showkit's venv)

def scan_worker(corpus_dir: str, unseen_dir: str | None) -> dict:
    """The scan in this tree on the same tracks: CPU time on one core, and the project's own figures."""
    t0 = time.perf_counter()
    from showkit.analysis import scan as scan_mod

    import_s = time.perf_counter() - t0
    import numpy as np
    import realmusic as rm

    base = rm.build(corpus_dir)
    rig = base.rig()
    table = scan_mod.mode_table(rig)
    sets = tracks(corpus_dir, unseen_dir)
    cost = {}
    for trs in sets.values():           # timed alone first, so that the peak memory is the scan's
        for name, tr in trs.items():
            w0, c0 = time.perf_counter(), time.process_time()
            scan_mod.scan_track(rig, tr.path, threads=1)
            cost[name] = {"cpu_s": time.process_time() - c0, "wall_s": time.perf_counter() - w0,
                          "duration_s": tr.duration_s, "path": str(tr.path)}
    out: dict = {"import_s": import_s, "sets": {}, "cost": cost, "peak_rss_mb": _rss_mb()}
    for set_name, trs in sets.items():
        rows = {}
        for name, tr in trs.items():
            m = rm.engine_map(rig, base.rig_path, tr.path)
            row = rm.map_figures(tr, table, m)
            notes_list = [np.asarray(f, float)[np.asarray(f, float) > 0] for f in m["notes_hz"]]
            extra = line_figures(tr, m["times_s"], notes_list, {"highest": np.array(
                [float(f.max()) if f.size else 0.0 for f in notes_list])})
            rows[name] = {"multipitch": row["multipitch"],
                          "viterbi": {k: row["melody"][k] for k in ("Raw Pitch Accuracy", "Raw Chroma Accuracy")},
                          "highest": extra["highest"], "ref_in_notes": extra["ref_in_notes"],
                          "notes_per_frame": extra["notes_per_frame"]}
        out["sets"][set_name] = rows
    return out


# ----------------------------------------------------------------------------- driver

def _run_worker(python: str, args: list, env_extra: dict | None = None) -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        res = Path(tmp) / "res.json"
        env = dict(os.environ, **ONE_CORE, **(env_extra or {}))
        env.setdefault("PYTHONPATH", str(HERE.parents[2]))
        r = subprocess.run([python, str(HERE), *args, "--worker-out", str(res)], env=env, check=False,
                           capture_output=True, text=True, timeout=7200)
        if r.returncode != 0:
            raise SystemExit(f"worker {python} {args[:2]} failed (exit {r.returncode}):\n{r.stderr[-3000:]}")
        return json.loads(res.read_text())


LINES = ("highest", "strongest", "viterbi")


def _fmt(name: str, r: dict) -> str:
    mp = r["multipitch"]
    cells = [f"{mp['Precision']:5.2f}", f"{mp['Recall']:5.2f}"]
    for k in LINES:
        cells += ([f"{r[k]['Raw Pitch Accuracy']:5.2f}", f"{r[k]['Raw Chroma Accuracy']:5.2f}"] if k in r
                  else ["    -", "    -"])
    return f"{name:30s} " + " ".join(cells) + f" {r['ref_in_notes']:5.2f} {r['notes_per_frame']:5.2f}"


def cost_line(rows: list) -> str:
    """CPU and wall time per minute of audio from per-track ``{"cpu_s", "wall_s", "duration_s"}`` in run order:
    over all tracks, and over all but the first (which carries the one-time start-up costs)."""
    minutes = sum(r["duration_s"] for r in rows) / 60.0
    rest = sum(r["duration_s"] for r in rows[1:]) / 60.0
    cpu = sum(r["cpu_s"] for r in rows)
    return (f"{cpu / minutes:.2f} CPU s per minute of audio over {minutes:.1f} min "
            f"({sum(r['cpu_s'] for r in rows[1:]) / rest:.2f} without the first track, which took "
            f"{rows[0]['cpu_s']:.2f} CPU s for {rows[0]['duration_s']:.0f} s); wall "
            f"{sum(r['wall_s'] for r in rows) / minutes:.2f} s per minute")


def report(res: dict) -> str:
    import numpy as np

    head = f"{'track':30s} {'mpP':>5s} {'mpR':>5s} " + " ".join(
        f"{k[:3] + 'RP':>5s} {k[:3] + 'RC':>5s}" for k in LINES) + f" {'inN':>5s} {'n/fr':>5s}"
    L = []
    for who, sets in res["figures"].items():
        for set_name, rows in sets.items():
            L.append(f"== {who} on {set_name}")
            L.append(head)
            for n, r in rows.items():
                L.append(_fmt(n, r))
            mean = {"multipitch": {k: float(np.mean([r["multipitch"][k] for r in rows.values()]))
                                   for k in ("Precision", "Recall")},
                    "ref_in_notes": float(np.mean([r["ref_in_notes"] for r in rows.values()])),
                    "notes_per_frame": float(np.mean([r["notes_per_frame"] for r in rows.values()]))}
            for k in LINES:
                if all(k in r for r in rows.values()):
                    mean[k] = {m: float(np.mean([r[k][m] for r in rows.values()]))
                               for m in ("Raw Pitch Accuracy", "Raw Chroma Accuracy")}
            L.append(_fmt("mean", mean))
    L.append("(mpP/mpR: mir_eval.multipitch precision/recall of the frame-level notes; hig/str/vit RP, RC: "
             "mir_eval.melody raw pitch/chroma accuracy of the highest note per frame, the strongest (the "
             "peer's posteriorgram), showkit's Viterbi line (pitches.dominant_pitch; for the scan its own "
             "dominant_hz); inN: share of voiced reference frames whose top note is within 50 c of a "
             "detected note; n/fr: notes per frame; mean: over the set's tracks)")
    for k, v in res["cost"].items():
        L.append(f"cost, {k}: {v}")
    return "\n".join(L)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("folder", nargs="?", default=os.path.join(tempfile.gettempdir(), "showkit-realmusic"))
    ap.add_argument("unseen", nargs="?", default=None, help="the unseen set's folder (eval_scan_unseen.py)")
    ap.add_argument("--scan-python", metavar="PYTHON", help="interpreter with showkit's dependencies: also "
                    "measure the scan of this tree on the same tracks")
    ap.add_argument("--keep", metavar="DIR", help="keep the peer's raw outputs (NAME.npz) in DIR and reuse them")
    ap.add_argument("--json", metavar="FILE")
    ap.add_argument("--worker", choices=("peer", "scan"), help=argparse.SUPPRESS)
    ap.add_argument("--worker-out", help=argparse.SUPPRESS)
    ap.add_argument("--paths", nargs="*", help=argparse.SUPPRESS)
    ap.add_argument("--out-dir", help=argparse.SUPPRESS)
    args = ap.parse_args()

    if args.worker == "peer":
        Path(args.worker_out).write_text(json.dumps(peer_worker(args.paths, Path(args.out_dir))))
        return 0
    if args.worker == "scan":
        Path(args.worker_out).write_text(json.dumps(scan_worker(args.folder, args.unseen)))
        return 0

    try:
        import basic_pitch  # noqa: F401
        import onnxruntime  # noqa: F401
    except ImportError as exc:
        print(f"the peer's packages are not installed here ({exc}); see this script's docstring: "
              "a plain venv with onnxruntime and `pip install --no-deps basic-pitch`", file=sys.stderr)
        return 2
    import numpy as np

    sets = tracks(args.folder, args.unseen)
    keep = Path(args.keep) if args.keep else Path(tempfile.mkdtemp(prefix="showkit-peer-"))
    keep.mkdir(parents=True, exist_ok=True)
    todo = [str(tr.path) for trs in sets.values() for tr in trs.values()
            if not (keep / (tr.path.stem + ".npz")).exists()]
    res: dict = {"figures": {}, "cost": {}}
    if todo:
        print(f"peer: {len(todo)} tracks, one core ...", file=sys.stderr)
        w = _run_worker(sys.executable, ["--worker", "peer", "--out-dir", str(keep), "--paths", *todo])
        dur = {str(tr.path): tr.duration_s for trs in sets.values() for tr in trs.values()}
        rows = [dict(r, duration_s=dur[p]) for p, r in w["tracks"].items()]
        minutes = sum(r["duration_s"] for r in rows) / 60.0
        res["cost"]["peer"] = (cost_line(rows) + f" (inference incl. decoding "
                               f"{sum(r['infer_cpu_s'] for r in rows) / minutes:.2f}, note creation "
                               f"{sum(r['notes_cpu_s'] for r in rows) / minutes:.2f}); import {w['import_s']:.2f} s, "
                               f"model load {w['model_load_s']:.2f} s; peak RSS {w['peak_rss_mb']:.0f} MB "
                               f"(onnxruntime {w['onnxruntime']}, {w['model']})")
        res["peer_worker"] = w
    for variant in VARIANTS:
        res["figures"][f"peer ({variant})"] = {s: {n: peer_figures(tr, keep / (tr.path.stem + ".npz"), variant)
                                                  for n, tr in trs.items()} for s, trs in sets.items()}
    if args.scan_python:
        print("scan: the same tracks, one core ...", file=sys.stderr)
        w = _run_worker(args.scan_python, ["--worker", "scan", args.folder] + ([args.unseen] if args.unseen else []),
                        {"SHOWKIT_CACHE_DIR": tempfile.mkdtemp(prefix="showkit-peer-cache-")})
        res["figures"]["scan"] = w["sets"]
        res["cost"]["scan"] = (cost_line(list(w["cost"].values())) + " (scan_track, threads=1); import of "
                               f"showkit.analysis.scan {w['import_s']:.2f} s; peak RSS {w['peak_rss_mb']:.0f} MB")
        res["scan_worker"] = w["cost"]
    print(report(res))
    if args.json:
        Path(args.json).write_text(json.dumps(res, indent=1, default=lambda o: np.asarray(o).tolist()))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
