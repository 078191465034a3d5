"""The scan measured on real music (run by hand: python tests/benchmarks/eval_scan_realmusic.py [FOLDER]).

Renders (or reuses, from FOLDER) the real-music set of ``tests/realmusic.py``
-- public-domain scores from music21's corpus played by fluidsynth with the
FluidR3 General MIDI soundfont, the MIDI notes at the soundfont's measured
tuning as ground truth -- scans every track on the set's invented rig and
prints issue 12's figures: frame-level mode-hit precision/recall/F1 (pooled
and per track), mir_eval multi-pitch metrics on the map's ``notes_hz``,
mir_eval.melody raw pitch accuracy of the dominant pitch, scores against the
share of time notes are held on readable modes (Spearman), off-mode/on-mode
score ratios, the drum kit's score, transposition recovery (+-25 cents) and
passage boundaries at the medley's joins (within 1.5 s); with ``--baseline``,
the same mode-hit and multi-pitch figures of a simple iterative harmonic-sum
estimator written here (Klapuri 2006, simplified) as a yardstick.

It runs against whichever engine is importable: the map comes from
``showkit.analysis.scan.track_map(rig, path)`` (the ``scan --map`` JSON layout
of issue 12) when that exists, else from ``showkit scan TRACK --map FILE``, else
from the engine before issue 12 (see ``realmusic.engine_map``).  ``--json
FILE`` also writes all the figures.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve()
sys.path.insert(0, str(HERE.parents[1]))          # tests/ (realmusic)
if not os.environ.get("PYTHONPATH"):
    sys.path.insert(0, str(HERE.parents[2]))      # the repository


def harmonic_sum_baseline(path, hop_s: float = 0.05, max_notes: int = 6):
    """A textbook iterative harmonic-sum multi-pitch estimator, written here as a yardstick.

    After A. Klapuri, "Multiple fundamental frequency estimation by summing
    harmonic amplitudes", ISMIR 2006, simplified: a compressed magnitude
    spectrum (|X|^(1/3) in place of the band-wise whitening), 186-ms Hann
    frames zero-padded 2x, candidates on a 10-cent grid from 55 to 1400 Hz,
    salience ``sum_m g(f0, m) max_{+-1 bin} Y(m f0)`` with
    ``g = (f0 + 27) / (m f0 + 320)`` over 20 partials, the best candidate
    taken and its partials' bins (+-2) cut by ``d = 0.89``, repeated while
    ``S_j / j^0.7`` grows (Klapuri's polyphony rule, gamma tuned by hand).
    Each found fundamental is placed by a parabola on the log magnitude of
    its nearest peak.  Returns ``(times_s, [array of f0 per frame])``.
    """
    import numpy as np
    import soundfile as sf
    from scipy.ndimage import maximum_filter1d

    x, rate = sf.read(str(path), dtype="float32")
    n_win, n_fft = 4096, 8192
    hop = round(hop_s * rate)
    pad = np.pad(x, (n_win // 2, n_win // 2))
    starts = np.arange(0, pad.size - n_win + 1, hop)
    frames = np.stack([pad[s:s + n_win] for s in starts]) * np.hanning(n_win)
    mag = np.abs(np.fft.rfft(frames, n_fft, axis=1))
    y = np.cbrt(mag)
    df = rate / n_fft
    cand = 55.0 * 2.0 ** (np.arange(0, 1200 * np.log2(1400 / 55.0), 10.0) / 1200.0)
    m = np.arange(1, 21)
    fm = cand[:, None] * m[None, :]
    ok = fm < rate / 2 - 2 * df
    idx = np.clip(np.round(fm / df).astype(int), 1, y.shape[1] - 2)
    g = np.where(ok, (cand[:, None] + 27.0) / (fm + 320.0), 0.0)
    resid = y.copy()
    chosen = np.zeros((y.shape[0], max_notes), int)
    sal = np.zeros((y.shape[0], max_notes))
    rows = np.arange(y.shape[0])
    for j in range(max_notes):
        ymax = maximum_filter1d(resid, 3, axis=1)
        s = np.einsum("tck,ck->tc", ymax[:, idx], g)
        best = np.argmax(s, axis=1)
        chosen[:, j], sal[:, j] = best, s[rows, best]
        for k in range(m.size):  # cancel the partials of the found sound
            b = idx[best, k]
            w = np.where(ok[best, k], 0.89, 0.0)
            for off in range(-2, 3):
                bb = np.clip(b + off, 0, resid.shape[1] - 1)
                resid[rows, bb] *= 1.0 - w
    score = np.cumsum(sal, axis=1) / np.arange(1, max_notes + 1) ** 0.7
    keep = np.concatenate([np.ones((y.shape[0], 1), bool), np.diff(score, axis=1) > 0], axis=1)
    keep = np.cumprod(keep, axis=1).astype(bool)
    loud = mag.max(axis=1) > 1e-3 * mag.max()
    notes = []
    for t in range(y.shape[0]):
        f = []
        if loud[t]:
            for j in np.nonzero(keep[t])[0]:
                f0 = cand[chosen[t, j]]
                lo, hi = int(f0 * 2 ** (-0.5 / 12) / df), int(np.ceil(f0 * 2 ** (0.5 / 12) / df))
                k = lo + int(np.argmax(mag[t, lo:hi + 1]))
                a, b, c = np.log(mag[t, k - 1:k + 2] + 1e-12)
                fine = (k + 0.5 * (a - c) / (a - 2 * b + c)) * df if a - 2 * b + c < 0 else k * df
                f.append(fine if abs(1200 * np.log2(max(fine, 1e-6) / f0)) <= 60.0 else f0)
        notes.append(np.unique(np.round(np.array(f), 2)))
    return starts / rate, notes


def baseline_figures(corpus) -> str:
    """Mode-hit F1 and mir_eval multipitch of :func:`harmonic_sum_baseline` on the scored tracks."""
    import mir_eval
    import numpy as np
    import realmusic as rm

    table = corpus.table()
    readable = np.asarray(table.readable, bool)
    tot = np.zeros(3, int)
    lines = []
    for name in rm.scored_tracks(corpus):
        tr = corpus[name]
        times, notes = harmonic_sum_baseline(tr.path)
        truth = rm.mode_hits(tr, table, times)[readable]
        est = np.zeros_like(truth)
        for i, f in enumerate(notes):
            j = rm.note_modes(f, table)
            est[:, i] = np.isin(np.arange(len(table.n))[readable], j[j >= 0])
        tp, fp, fn = int((truth & est).sum()), int((~truth & est).sum()), int((truth & ~est).sum())
        tot += (tp, fp, fn)
        prf = rm._prf(tp, fp, fn)
        mp = ""
        if tr.freq_hz.size:
            _, ref = rm.sounding_hz(tr, 0.0, times)
            r = mir_eval.multipitch.evaluate(times, ref, times, notes)
            mp = f"  multipitch P {r['Precision']:.2f} R {r['Recall']:.2f}"
        lines.append(f"  {name:28s} hit F1 {prf['f1']:.2f} (P {prf['precision']:.2f} R {prf['recall']:.2f}){mp}")
    p = rm._prf(*tot)
    return "\n".join([(f"harmonic-sum baseline (Klapuri 2006, simplified): mode hits pooled P {p['precision']:.3f} "
                      f"R {p['recall']:.3f} F1 {p['f1']:.3f}"), *lines])


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("folder", nargs="?", default=os.path.join(tempfile.gettempdir(), "showkit-realmusic"))
    ap.add_argument("--json", metavar="FILE")
    ap.add_argument("--baseline", action="store_true", help="also run the harmonic-sum yardstick")
    args = ap.parse_args()
    import numpy as np
    import realmusic as rm

    os.environ.setdefault("SHOWKIT_CACHE_DIR", tempfile.mkdtemp(prefix="showkit-eval-cache-"))
    t = time.perf_counter()
    corpus = rm.build(args.folder)
    print(f"corpus ready in {time.perf_counter() - t:.1f} s ({args.folder})")
    print(rm.describe(corpus))
    t = time.perf_counter()
    res = rm.evaluate(corpus, progress=lambda n: print(f"  scanning {n}", file=sys.stderr))
    print(f"scan + evaluation: {time.perf_counter() - t:.1f} s")
    print(rm.report(res))
    if args.baseline:
        t = time.perf_counter()
        print(baseline_figures(corpus))
        print(f"baseline: {time.perf_counter() - t:.1f} s")
    if args.json:
        Path(args.json).write_text(json.dumps(res, indent=1, default=lambda o: np.asarray(o).tolist()))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
