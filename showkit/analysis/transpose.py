"""Which transposition would lay a track's pitches better on the tube's modes.

Shifts from -3 to +3 semitones in 25-cent steps are tried on the analysed
pitches (the peak frequencies are multiplied by ``2^(s/1200)`` and mapped to
the modes again): nothing is re-synthesised to score them.  The flame-contrast
term of each passage is kept from the unshifted track (a transposition
hardly moves the drive ceiling of a passage whose level is set by its loudest
frames; stated in the README).  The best shift is suggested only when it
beats the track as it is by :data:`MIN_GAIN` points.

A preview of the shifted best passage is rendered with librosa's pitch
shifter (phase-vocoder time stretch and resampling, ``librosa.effects.pitch_shift``;
Laroche & Dolson, IEEE Trans. Speech Audio Proc. 7(3), 1999).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from showkit.analysis.features import TrackFeatures
from showkit.analysis.pitches import ModeTable
from showkit.analysis.score import frame_scores, passage_score, track_score

#: Largest shift tried, semitones.
RANGE_SEMITONES = 3.0
#: Step between shifts tried, cents.
STEP_CENTS = 25.0
#: Points a shift must gain over the track as it is to be suggested.
MIN_GAIN = 2.0


def shift_grid() -> np.ndarray:
    """Shifts tried, cents, smallest first (so that ties go to the smaller shift)."""
    n = int(round(RANGE_SEMITONES * 100.0 / STEP_CENTS))
    grid = np.arange(-n, n + 1) * STEP_CENTS
    return grid[np.argsort(np.abs(grid), kind="stable")]


def shifted_scores(features: TrackFeatures, table: ModeTable, spans: list[tuple[int, int]],
                   factors: list[np.ndarray], lengths_s: list[float]) -> dict[float, float]:
    """Track score at every shift of :func:`shift_grid` (cents -> score).

    Parameters
    ----------
    features : TrackFeatures
    table : ModeTable
    spans : list of (int, int)
        Each passage's frames ``first, last``.
    factors : list of ndarray
        Each passage's contrast term ``c(t)`` (from the unshifted track).
    lengths_s : list of float
        Passage lengths, s.
    """
    out = {}
    for shift in shift_grid():
        fs = frame_scores(features, table, float(shift))
        scores = [passage_score(fs, c, a, b) for (a, b), c in zip(spans, factors)]
        out[float(shift)] = track_score(scores, lengths_s)
    return out


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
