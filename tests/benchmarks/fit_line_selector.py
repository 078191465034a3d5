"""A fitted note selector for the dominant line, measured (run by hand: python tests/benchmarks/fit_line_selector.py FOLDER).

The dominant line (DEVELOPERS.md Methods §8b) is a Viterbi path through each
frame's detected notes whose emission is a hand-set score (energy and height)
and whose step costs a hand-set weight per semitone.  This script asks whether
a FITTED emission does better: per detected note it builds a few cheap
features (below), labels the note "the reference top note" (within 50 cents
of ``realmusic.melody``, the latency-timed highest sounding note), and fits a
conditional logit over each frame's notes (McFadden, "Conditional logit
analysis of qualitative choice behavior", 1974: a softmax over the frame's
candidates, only frames whose reference is among them; L2 penalty 1e-3) with
numpy/scipy; its linear score is the emission of the existing Viterbi
(``pitches._best_path``, cap 5 semitones), the jump weight chosen on the
training pieces from a grid.  Figures are mir_eval.melody raw pitch accuracy:

* leave-one-piece-out over the six pieces of ``tests/realmusic.py`` (fit on
  five, jump weight chosen on the five, scored on the sixth), for the fitted
  selector and, as the fair comparison, for the hand line with its energy and
  jump weights re-searched on the five the same way;
* the selector fitted on each piece alone and scored on that same piece (an
  upper bound of what a linear selector over these features can reach);
* with ``--unseen DIR`` (``tests/benchmarks/eval_scan_unseen.py``'s folder,
  read only when already rendered), the selector fitted on all six scored on
  music never fitted on.

Measured 2026-12-03 (DEVELOPERS.md §8b): no fitted selector beats the hand line,
so the scan keeps the hand line.
"""

from __future__ import annotations

import argparse
import os
import sys
from pathlib import Path

HERE = Path(__file__).resolve()
sys.path.insert(0, str(HERE.parents[1]))          # tests/ (realmusic)
sys.path.insert(0, str(HERE.parent))              # tests/benchmarks/ (eval_scan_unseen)
if not os.environ.get("PYTHONPATH"):
    sys.path.insert(0, str(HERE.parents[2]))      # the repository

import numpy as np  # noqa: E402
import realmusic as rm  # noqa: E402

#: Feature names (per detected note), in the order of :func:`note_features`.
FEATURES = ("height_oct", "energy_frame_ln", "energy_track_ln", "salience_rank", "run_frames", "tonal",
            "partial_of_lower", "octave_above_present", "octave_below_present", "energy_rise_ln",
            "below_top_oct", "is_top")
#: Feature sets fitted: all of them, and the four that separate the reference best (ROC AUC, §8b).
SETS = {"all": tuple(range(len(FEATURES))), "four": (0, 1, 4, 5)}
JUMPS = (0.0, 0.05, 0.1, 0.2, 0.3, 0.5, 0.8, 1.2)
CAP_SEMITONES = 5.0


def note_features(notes_hz: np.ndarray, notes_energy: np.ndarray, notes_tonal: np.ndarray):
    """``(X, ok)``: features (frames, notes, len(FEATURES)) and which notes exist.

    Heights in octaves re 100 Hz; energies as natural logs relative to the frame's strongest note and
    to the track's median note; the salience rank is the order the estimator found the notes in; the
    run counts frames (up to 8 each way) in which a note within 40 cents persists; "partial of lower"
    is a lower note g with the note within 25 cents of k g, k = 2..6; the rise is ln(E / E before)
    of the same note (+-3, 3 for a new note).
    """
    f = np.asarray(notes_hz, float)
    e = np.asarray(notes_energy, float)
    ok = np.isfinite(f) & (e > 0)
    f = np.where(ok, f, np.nan)
    le = np.log(np.where(ok, e, np.nan))
    frames, n = f.shape
    lf = np.log2(f)
    with np.errstate(invalid="ignore"):
        top = np.max(np.where(ok, lf, -np.inf), axis=1, keepdims=True)
        le_frame = le - np.max(np.where(ok, le, -np.inf), axis=1, keepdims=True)
    med = np.median(le[ok]) if ok.any() else 0.0
    ratio = lf[:, :, None] - lf[:, None, :]                       # octaves of note i over note j
    finite = np.isfinite(ratio)
    partial = np.zeros((frames, n), bool)
    for k in range(2, 7):
        partial |= (finite & (np.abs(1200.0 * (ratio - np.log2(k))) <= 25.0)).any(axis=2)
    octave_above = (finite & (np.abs(1200.0 * (ratio + 1.0)) <= 25.0)).any(axis=2)
    octave_below = (finite & (np.abs(1200.0 * (ratio - 1.0)) <= 25.0)).any(axis=2)

    def near(other):
        d = np.abs(1200.0 * (lf[:, :, None] - np.log2(other)[:, None, :]))
        d = np.where(np.isfinite(d), d, np.inf)
        return d.min(axis=2) <= 40.0, d.argmin(axis=2)

    run = np.zeros((frames, n))
    for step in (1, -1):
        alive = np.ones((frames, n), bool)
        for k in range(1, 9):
            other = np.full((frames, n), np.nan)
            if step == 1:
                other[k:] = f[:-k]
            else:
                other[:-k] = f[k:]
            alive &= near(other)[0]
            run += alive
    prev_f = np.full((frames, n), np.nan)
    prev_e = np.full((frames, n), np.nan)
    prev_f[1:], prev_e[1:] = f[:-1], le[:-1]
    found, j = near(prev_f)
    rise = np.clip(np.where(found, le - np.take_along_axis(prev_e, j, axis=1), 3.0), -3.0, 3.0)
    X = np.stack([lf - np.log2(100.0), le_frame, le - med,
                  np.broadcast_to(np.arange(n, dtype=float), (frames, n)), run,
                  np.asarray(notes_tonal, float), partial, octave_above, octave_below, rise,
                  lf - top, (lf >= top - 1e-9)], axis=2).astype(float)
    return np.where(ok[:, :, None], np.nan_to_num(X), 0.0), ok


def track_data(rig, path: Path, track) -> dict:
    """The scan's notes of a track, their features and labels, and the reference melody."""
    from showkit.analysis import scan as scan_mod

    feat = scan_mod._analyse(rig, path).features
    hop_s = 1.0 / feat.frame_rate_hz
    times = np.array([round(k * hop_s, 4) for k in range(feat.frames)])
    _, ref = rm.melody(track, 0.0, times)
    X, ok = note_features(feat.notes_hz, feat.notes_energy, feat.notes_tonal)
    f = np.where(ok, feat.notes_hz, 1.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        cents = np.abs(1200.0 * np.log2(f / np.where(ref > 0, ref, 1.0)[:, None]))
    return {"times": times, "ref": ref, "f": np.where(ok, feat.notes_hz, np.nan), "X": X, "ok": ok,
            "y": ok & (ref[:, None] > 0) & (cents < 50.0)}


def fit_logit(tracks: list, cols, l2: float = 1e-3) -> np.ndarray:
    """Conditional logit weights over ``cols`` (each track weighted equally)."""
    from scipy.optimize import minimize

    Xs, ys, oks, wts = [], [], [], []
    for d in tracks:
        use = d["y"].any(axis=1) & (d["ok"].sum(axis=1) > 1)
        Xs.append(d["X"][use][:, :, cols])
        ys.append(d["y"][use])
        oks.append(d["ok"][use])
        wts.append(np.full(use.sum(), 1.0 / max(use.sum(), 1)))
    X, y, ok, g = (np.concatenate(a) for a in (Xs, ys, oks, wts))

    def loss(b):
        z = np.where(ok, X @ b, -np.inf)
        lse = np.logaddexp.reduce(z, axis=1)
        zt = np.logaddexp.reduce(np.where(y, z, -np.inf), axis=1)
        p = np.exp(z - lse[:, None])
        q = np.where(y, np.exp(z - zt[:, None]), 0.0)
        return -(g * (zt - lse)).sum() + 0.5 * l2 * b @ b, -np.einsum("t,tnk,tn->k", g, X, q - p) + l2 * b

    return minimize(loss, np.zeros(len(cols)), jac=True, method="L-BFGS-B").x


def rpa(d: dict, score: np.ndarray, jump: float) -> float:
    """mir_eval.melody raw pitch accuracy of the Viterbi line over ``score``."""
    import mir_eval

    from showkit.analysis.pitches import _best_path

    ok = d["ok"]
    semis = 12.0 * np.log2(np.where(ok, d["f"], 1.0))
    path = _best_path(np.where(ok, score, -np.inf), semis, jump, CAP_SEMITONES)
    rows = np.arange(ok.shape[0])
    est = np.where(ok[rows, path], d["f"][rows, path], 0.0)
    return float(mir_eval.melody.evaluate(d["times"], d["ref"], d["times"], est)["Raw Pitch Accuracy"])


def best_jump(tracks: list, scores: list) -> float:
    return max(JUMPS, key=lambda j: np.mean([rpa(d, s, j) for d, s in zip(tracks, scores)]))


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("folder", help="the real-music set's folder (realmusic.build)")
    ap.add_argument("--unseen", help="eval_scan_unseen.py's folder (scored, never fitted on)")
    a = ap.parse_args()
    base = rm.build(a.folder)
    rig = base.rig()
    names = [p.name for p in rm.PIECES]
    six = {n: track_data(rig, base[n].path, base[n]) for n in names}
    unseen = []
    if a.unseen:
        import eval_scan_unseen as eu

        tracks = [v for v in eu.build(Path(a.unseen), base)["tracks"].values() if v.freq_hz.size]
        unseen = [track_data(rig, tr.path, tr) for tr in tracks]
        print("unseen tracks:", " ".join(tr.name for tr in tracks))

    def hand(d, energy_weight):
        return energy_weight * d["X"][:, :, 1] + d["X"][:, :, 0]

    grid = [(ew, jw) for ew in (0.0, 0.1, 0.25, 0.5, 1.0) for jw in (0.1, 0.25, 0.5, 1.0, 2.0)]
    r = {(g, n): rpa(six[n], hand(six[n], g[0]), g[1]) for g in grid for n in names}
    lopo = []
    for t in names:
        g = max(grid, key=lambda g: np.mean([r[g, n] for n in names if n != t]))
        lopo.append(r[g, t])
    print("hand line, energy and jump weights searched on the other five (LOPO):",
          " ".join(f"{x:.3f}" for x in lopo), f"mean {np.mean(lopo):.3f}")
    print("hand line as shipped (0.25, 0.5):", f"mean {np.mean([r[(0.25, 0.5), n] for n in names]):.3f}")
    if unseen:
        got = [rpa(d, hand(d, 0.25), 0.5) for d in unseen]
        print("  unseen:", " ".join(f"{x:.2f}" for x in got), f"mean {np.mean(got):.3f}")
    for label, cols in SETS.items():
        cols = list(cols)
        lopo = []
        for t in names:
            train = [six[n] for n in names if n != t]
            b = fit_logit(train, cols)
            jump = best_jump(train, [d["X"][:, :, cols] @ b for d in train])
            lopo.append(rpa(six[t], six[t]["X"][:, :, cols] @ b, jump))
        print(f"fitted selector ({label}: {', '.join(FEATURES[c] for c in cols)})")
        print("  leave-one-piece-out:", " ".join(f"{x:.3f}" for x in lopo), f"mean {np.mean(lopo):.3f}")
        own = []
        for n in names:
            b = fit_logit([six[n]], cols)
            own.append(max(rpa(six[n], six[n]["X"][:, :, cols] @ b, j) for j in JUMPS))
        print("  fitted on each piece itself (upper bound):", " ".join(f"{x:.3f}" for x in own),
              f"mean {np.mean(own):.3f}")
        b = fit_logit(list(six.values()), cols)
        jump = best_jump(list(six.values()), [d["X"][:, :, cols] @ b for d in six.values()])
        print("  fitted on all six: weights", " ".join(f"{FEATURES[c]} {w:+.3f}" for c, w in zip(cols, b)),
              f"jump {jump}")
        if unseen:
            got = [rpa(d, d["X"][:, :, cols] @ b, jump) for d in unseen]
            print("  unseen (never fitted on):", " ".join(f"{x:.2f}" for x in got), f"mean {np.mean(got):.3f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
