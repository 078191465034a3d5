"""Which transposition would lay a track's notes better on the tube's modes.

The search runs on the detected notes, with cents resolution, without
re-synthesising anything:

1. every sustained note found in a sounding frame is weighted by how much of
   the band it carries (as in the score: fully from a quarter) and placed on
   a 1-cent grid; the histogram is correlated with the readable modes'
   tolerance windows (:func:`showkit.analysis.score.tolerance_cents`) for
   every shift from -300 to +300 cents, which says how much note-time each
   shift would put on modes;
2. the best few shifts of that curve (at least :data:`SEPARATION_CENTS` apart)
   are scored in full -- map, hits, holds, passages, track score, exactly as
   the scan scores the track as it is -- and the best is suggested when it
   beats the track as it is by :data:`MIN_GAIN` points.

A preview of the shifted best passage is rendered with librosa's pitch
shifter (phase-vocoder time stretch and resampling, ``librosa.effects.pitch_shift``;
Laroche & Dolson, IEEE Trans. Speech Audio Proc. 7(3), 1999).
"""

from __future__ import annotations

from pathlib import Path
from collections.abc import Callable

import numpy as np

from showkit.analysis.features import TrackFeatures
from showkit.analysis.pitches import ModeTable

#: Largest shift searched, cents.
RANGE_CENTS = 300
#: Shifts scored in full.
CANDIDATES = 5
#: Candidates at least this far apart, cents.
SEPARATION_CENTS = 30
#: Points a shift must gain over the track as it is to be suggested.
MIN_GAIN = 2.0


def shift_curve(features: TrackFeatures, table: ModeTable, gate: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(shifts_cents, note_time_on_modes)`` for every whole-cent shift within +-RANGE_CENTS."""
    from showkit.analysis import score as sc

    shifts = np.arange(-RANGE_CENTS, RANGE_CENTS + 1)
    readable = np.asarray(table.readable, bool)
    if not readable.any() or features.frames == 0:
        return shifts, np.zeros(shifts.size)
    f = features.notes_hz.astype(float)
    safe = np.where(features.energy > 0, features.energy, 1.0)
    share = features.notes_energy * features.notes_tonal / safe[:, None]
    ok = (np.isfinite(f) & (features.notes_tonal >= sc.MIN_TONAL) & (share >= sc.HIT_ON)
          & (gate[:, None] > 0))
    if not ok.any():
        return shifts, np.zeros(shifts.size)
    w = (np.minimum(1.0, share / sc.FULL_STRENGTH) * gate[:, None])[ok]
    base = 1200.0 * np.log2(np.min(table.freq_hz)) - 2 * RANGE_CENTS - 100
    pos = np.rint(1200.0 * np.log2(f[ok]) - base).astype(int)
    size = int(np.ceil(1200.0 * np.log2(np.max(table.freq_hz)) - base)) + 2 * RANGE_CENTS + 200
    keep = (pos >= 0) & (pos < size)
    hist = np.bincount(pos[keep], weights=w[keep], minlength=size)
    comb = np.zeros(size)
    tol = sc.tolerance_cents(table)
    for fm, t in zip(table.freq_hz[readable], tol[readable]):
        c = 1200.0 * np.log2(fm) - base
        comb[int(np.ceil(c - t)):int(np.floor(c + t)) + 1] = 1.0
    # value(s) = sum_c hist[c] comb[c + s]
    full = np.correlate(comb, hist, mode="full")  # index k <-> shift k - (size - 1)
    value = full[(size - 1) - RANGE_CENTS:(size - 1) + RANGE_CENTS + 1]
    return shifts, value


def candidates(shifts: np.ndarray, value: np.ndarray, count: int = CANDIDATES) -> list[float]:
    """The best shifts of the curve, at least :data:`SEPARATION_CENTS` apart (smaller shift on ties)."""
    order = np.lexsort((np.abs(shifts), -value))
    out: list[float] = []
    for k in order:
        if value[k] <= 0 or len(out) >= count:
            break
        if all(abs(shifts[k] - s) >= SEPARATION_CENTS for s in out):
            # the middle of the plateau around the peak: every shift there lays the notes as well
            top = value >= value[k] * (1.0 - 1e-6)
            lo = k
            while lo > 0 and top[lo - 1]:
                lo -= 1
            hi = k
            while hi < value.size - 1 and top[hi + 1]:
                hi += 1
            out.append(float(shifts[(lo + hi) // 2]))
    return out


def search(features: TrackFeatures, table: ModeTable, gate: np.ndarray,
           score_at: Callable[[float], float]) -> tuple[float, float, dict]:
    """``(shift_cents, score, scored)``: the suggestion (0 unless it gains :data:`MIN_GAIN`).

    ``score_at(shift_cents)`` is the track score with every note moved by that
    shift; ``scored`` maps every shift scored to its score.
    """
    shifts, value = shift_curve(features, table, gate)
    scored = {0.0: float(score_at(0.0))}
    for s in candidates(shifts, value):
        if s != 0.0:
            scored[s] = float(score_at(s))
    return (*best_shift(scored), scored)


def best_shift(scores_by_shift: dict[float, float]) -> tuple[float, float]:
    """``(shift_cents, score)`` of the suggestion: 0 unless a shift gains :data:`MIN_GAIN`."""
    base = scores_by_shift.get(0.0, 0.0)
    shift = max(scores_by_shift, key=lambda s: (scores_by_shift[s], -abs(s)))
    if scores_by_shift[shift] < base + MIN_GAIN:
        return 0.0, base
    return shift, scores_by_shift[shift]


def render_preview(path: str | Path, start_s: float, end_s: float, semitones: float,
                   out_path: str | Path, protect=()) -> Path:
    """Write the passage ``start_s``-``end_s`` of ``path`` shifted by ``semitones`` as a 16-bit WAV.

    Parameters
    ----------
    path : path
        Source track.
    start_s, end_s : float
        Passage, s.
    semitones : float
        Shift, semitones (fractions allowed).
    out_path : path
        WAV file written (replaced if present).
    """
    import librosa

    from showkit.analysis.audio import load_audio

    audio = load_audio(path, None, start_s, end_s)
    shifted = librosa.effects.pitch_shift(audio.samples.astype(np.float32), sr=audio.rate_hz,
                                          n_steps=float(semitones))
    peak = float(np.max(np.abs(shifted))) if shifted.size else 0.0
    if peak > 1.0:
        shifted = shifted / peak
    from showkit.safesave import write_audio

    return write_audio(Path(out_path), shifted, audio.rate_hz, "PCM_16",
                       protect=[(path, "the source track")] + list(protect), what="preview")
