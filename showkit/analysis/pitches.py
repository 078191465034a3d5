"""The tube's modes as a table, and the dominant pitch of each frame.

:class:`ModeTable` holds the rig's modes as arrays: frequency, Q, the
half-power half-width ``f_n / (2 Q)`` in cents (DEVELOPERS.md Methods §8) and
whether the holes resolve the mode's pattern.  The notes themselves are
found by :mod:`showkit.analysis.multipitch`; :func:`dominant_pitch` picks the
line a listener follows from them (checked against the melody of rendered
public-domain scores with ``mir_eval.melody`` in the real-music tests).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Half-width used for a mode whose Q is unknown (too broad to have half-power points), cents.
BROAD_HALF_WIDTH_CENTS = 50.0
#: A note is part of the dominant line when it carries at least this share of the strongest note's energy.
DOMINANT_SHARE = 0.2
#: ... and a note may continue the line when it carries at least this share.
DOMINANT_SHARE_NEAR = 0.05
#: Frames of the running median that keeps the line continuous.
DOMINANT_SMOOTH_FRAMES = 5


@dataclass(frozen=True)
class ModeTable:
    """The rig's modes as arrays, for mapping pitches.

    Attributes
    ----------
    n : ndarray of int
    freq_hz : ndarray
    q : ndarray
        Quality factor (NaN when too broad to measure).
    half_width_cents : ndarray
        Half of the half-power band ``f_n / Q`` in cents (``BROAD_HALF_WIDTH_CENTS``
        when Q is unknown).
    readable : ndarray of bool
        The pattern of the mode can be read in the flames.
    notes : tuple of str
    """

    n: np.ndarray
    freq_hz: np.ndarray
    q: np.ndarray
    half_width_cents: np.ndarray
    readable: np.ndarray
    notes: tuple

    @classmethod
    def from_modes(cls, modes) -> "ModeTable":
        """From :func:`showkit.physics.modes.find_modes` output (sorted by frequency)."""
        modes = sorted(modes, key=lambda m: m.frequency_hz)
        freq = np.array([m.frequency_hz for m in modes], dtype=float)
        half = np.array([BROAD_HALF_WIDTH_CENTS if m.q is None else
                         1200.0 * np.log2(1.0 + 0.5 / m.q) for m in modes], dtype=float)
        return cls(n=np.array([m.n for m in modes], dtype=int), freq_hz=freq,
                   q=np.array([np.nan if m.q is None else m.q for m in modes], dtype=float),
                   half_width_cents=half,
                   readable=np.array([m.pattern == "readable" for m in modes], dtype=bool),
                   notes=tuple(m.note for m in modes))

    def index_of(self, n: int) -> int:
        return int(np.nonzero(self.n == n)[0][0])


def dominant_pitch(notes_hz: np.ndarray, notes_energy: np.ndarray,
                   smooth_frames: int = DOMINANT_SMOOTH_FRAMES) -> np.ndarray:
    """The dominant pitch of each frame, Hz (NaN for a frame without notes).

    The highest of the frame's notes that carries at least
    :data:`DOMINANT_SHARE` of the strongest note's energy: the top line of
    the texture, where a melody usually lies, without its faint upper
    partials or reverberation.  The line is then kept continuous: in each
    frame the note (of those carrying at least :data:`DOMINANT_SHARE_NEAR` of
    the strongest) nearest to the running median of the top line over
    ``smooth_frames`` frames is taken (measured on the rendered scores of
    ``tests/realmusic.py``: raw pitch accuracy 0.55 against 0.53 without).
    """
    f = np.asarray(notes_hz, dtype=float)
    e = np.asarray(notes_energy, dtype=float)
    if f.ndim != 2 or f.shape[1] == 0:
        return np.full(f.shape[0] if f.ndim else 0, np.nan)
    peak = np.max(e, axis=1, keepdims=True)
    strong = np.isfinite(f) & (e >= DOMINANT_SHARE * peak) & (e > 0)
    top = np.max(np.where(strong, f, -np.inf), axis=1)
    top = np.where(np.isfinite(top), top, np.nan)
    if smooth_frames <= 1 or f.shape[0] == 0:
        return top
    from scipy.ndimage import median_filter

    none = -1.0e4
    cents = np.where(np.isfinite(top), 1200.0 * np.log2(np.where(np.isfinite(top), top, 1.0)), none)
    med = median_filter(cents, size=smooth_frames, mode="nearest")
    near = np.isfinite(f) & (e >= DOMINANT_SHARE_NEAR * peak) & (e > 0)
    fc = 1200.0 * np.log2(np.where(np.isfinite(f), f, 1.0))
    dist = np.where(near, np.abs(fc - med[:, None]), np.inf)
    k = np.argmin(dist, axis=1)
    rows = np.arange(f.shape[0])
    ok = np.isfinite(dist[rows, k]) & (med > none / 2)
    return np.where(ok, f[rows, k], np.nan)
