"""Dominant pitches per frame, and where they fall against the tube's modes.

Peaks of the power spectrum are picked per frame (local maxima, the strongest
few), placed between bins by fitting a parabola to the log magnitude at the
peak and its two neighbours (J. O. Smith, *Spectral Audio Signal Processing*,
"Quadratic interpolation of spectral peaks", CCRMA 2011), and their energy
taken as the sum over the Hann window's main lobe (+-2 bins).  The tests check
the frequencies against the 12-TET tuning formula (physics.md section 8) and
against librosa's pYIN tracker (Mauch & Dixon, ICASSP 2014).

Each pitch is then mapped to the nearest mode: its offset in cents, whether
it lies inside the mode's half-power band ``f_n / Q`` (physics.md section 8),
and a weight for the score: the resonator's power response
``1 / (1 + (offset / half_width)^2)`` with the half-width never taken below
:data:`MIN_HALF_WIDTH_CENTS` -- the gas warms during a show and moves the
modes by about 3 cents per kelvin (physics.md section 2), so a note that sits
within a few cents is as good as exact.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Peaks picked per frame.
PEAKS_PER_FRAME = 4
#: Peaks more than this far (dB) below the frame's strongest are dropped.
PEAK_RANGE_DB = 40.0
#: Main-lobe half-width of the Hann window, bins.
LOBE_BINS = 2
#: The narrowest half-width allowed to a mode in the score weight, cents (project's choice).
MIN_HALF_WIDTH_CENTS = 10.0
#: Half-width used for a mode whose Q is unknown (too broad to have half-power points), cents.
BROAD_HALF_WIDTH_CENTS = 50.0


def spectral_peaks(power: np.ndarray, first_hz: float, bin_hz: float,
                   count: int = PEAKS_PER_FRAME) -> tuple[np.ndarray, np.ndarray]:
    """The strongest ``count`` peaks of each frame of a power spectrogram.

    Parameters
    ----------
    power : ndarray, shape (bins, frames)
        ``|X|^2`` on bins ``first_hz + k * bin_hz``.
    first_hz : float
        Frequency of bin 0, Hz.
    bin_hz : float
        Bin spacing, Hz.
    count : int
        Peaks kept per frame (fewer are real when the frame has fewer).

    Returns
    -------
    freq_hz : ndarray, shape (frames, count)
        Interpolated peak frequencies, Hz (NaN where there is no peak).
    energy : ndarray, shape (frames, count)
        Main-lobe energy of each peak (0 where there is no peak).
    """
    p = np.asarray(power, dtype=np.float32)
    bins, frames = p.shape
    if bins < 3 or frames == 0:
        return np.full((frames, count), np.nan), np.zeros((frames, count))
    inner = p[1:-1]
    is_peak = (inner > p[:-2]) & (inner >= p[2:])
    top = p.max(axis=0)
    is_peak &= inner >= top[None, :] * 10.0 ** (-PEAK_RANGE_DB / 10.0)
    is_peak &= inner > 0
    score = np.where(is_peak, inner, -1.0)
    k = min(count, score.shape[0])
    idx = np.argpartition(-score, k - 1, axis=0)[:k]  # (k, frames), bin index - 1
    cols = np.arange(frames)[None, :]
    valid = score[idx, cols] > 0
    centre = idx + 1
    with np.errstate(divide="ignore"):
        a = np.log(np.maximum(p[centre - 1, cols], 1e-30))
        b = np.log(np.maximum(p[centre, cols], 1e-30))
        c = np.log(np.maximum(p[centre + 1, cols], 1e-30))
    den = a - 2.0 * b + c
    delta = np.where(den < 0, 0.5 * (a - c) / np.where(den < 0, den, -1.0), 0.0)
    delta = np.clip(delta, -0.5, 0.5)
    freq = first_hz + (centre + delta) * bin_hz
    csum = np.concatenate([np.zeros((1, frames), np.float64), np.cumsum(p, axis=0, dtype=np.float64)])
    lo = np.clip(centre - LOBE_BINS, 0, bins)
    hi = np.clip(centre + LOBE_BINS + 1, 0, bins)
    energy = csum[hi, cols] - csum[lo, cols]
    freq = np.where(valid, freq, np.nan).T
    energy = np.where(valid, energy, 0.0).T
    return freq, energy


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


@dataclass
class ModeHits:
    """Pitches mapped to the nearest mode (arrays shaped like the pitches).

    Attributes
    ----------
    index : ndarray of int
        Index into the :class:`ModeTable` (-1 where there is no pitch).
    cents : ndarray
        Offset from that mode, cents.
    in_band : ndarray of bool
        Inside the mode's half-power band ``f_n / Q``.
    weight : ndarray
        Score weight, 0 to 1, zero for modes whose pattern cannot be read.
    """

    index: np.ndarray
    cents: np.ndarray
    in_band: np.ndarray
    weight: np.ndarray


def map_to_modes(freq_hz: np.ndarray, table: ModeTable, shift_cents: float = 0.0) -> ModeHits:
    """Nearest mode (in cents) of every pitch, after shifting the pitches by ``shift_cents``.

    Parameters
    ----------
    freq_hz : ndarray
        Pitches, Hz (NaN: none).
    table : ModeTable
    shift_cents : float
        Transposition applied to the pitches first, cents.
    """
    f = np.asarray(freq_hz, dtype=float)
    ok = np.isfinite(f) & (f > 0)
    if table.freq_hz.size == 0:
        z = np.zeros(f.shape)
        return ModeHits(np.full(f.shape, -1), z, z.astype(bool), z)
    logf = np.where(ok, np.log2(np.where(ok, f, 1.0)) + shift_cents / 1200.0, 0.0)
    logm = np.log2(table.freq_hz)
    if logm.size == 1:
        j = np.zeros(f.shape, dtype=int)
    else:
        j = np.clip(np.searchsorted(logm, logf), 1, logm.size - 1)
        j = np.where(np.abs(logf - logm[j - 1]) < np.abs(logf - logm[j]), j - 1, j)
    cents = 1200.0 * (logf - logm[j])
    half = table.half_width_cents[j]
    in_band = ok & (np.abs(cents) <= half)
    width = np.maximum(half, MIN_HALF_WIDTH_CENTS)
    weight = np.where(ok & table.readable[j], 1.0 / (1.0 + (cents / width) ** 2), 0.0)
    return ModeHits(index=np.where(ok, j, -1), cents=np.where(ok, cents, np.nan),
                    in_band=in_band, weight=weight)


def dominant_pitch(freq_hz: np.ndarray, energy: np.ndarray) -> np.ndarray:
    """The strongest peak of each frame, Hz (NaN for a frame without peaks)."""
    if freq_hz.shape[1] == 0:
        return np.full(freq_hz.shape[0], np.nan)
    k = np.argmax(energy, axis=1)
    return freq_hz[np.arange(freq_hz.shape[0]), k]
