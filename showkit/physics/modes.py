"""The tube's resonances: frequency, Q, shape and what the flames show.

Resonances are the peaks of the input impedance ``|p(0)/U(0)|`` of the
transfer-matrix model below the plane-wave limit; Q is the half-power
bandwidth of ``|Z_in|^2`` (DEVELOPERS.md Methods §9).  A mode is numbered by its
pressure nodes along the tube: ``n = 0`` is the breathing mode the holes
create (uniform pressure), ``n >= 1`` has ``n`` nodes.

At safe levels the flames stand tallest at the pressure nodes (DEVELOPERS.md Methods §6), so the number of flame peaks along the row is the number of
nodes that fall within the row of holes, spaced half a wavelength apart.
A pattern needs about 4 holes per half-wavelength to be read (common
practice, no source).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from showkit.physics.pitch import nearest_note
from showkit.physics.tube import TubeModel

#: Holes per half-wavelength below which a pattern is not readable
#: (common practice, no source).
MIN_HOLES_PER_HALF_WAVE = 4.0

#: Lowest frequency searched for resonances, Hz.
SEARCH_FLOOR_HZ = 5.0


@dataclass(frozen=True)
class Mode:
    """One resonance of the tube.

    Attributes
    ----------
    n : int
        Number of pressure nodes along the tube (0: breathing mode).
    frequency_hz : float
    q : float or None
        Quality factor from the half-power bandwidth; ``None`` when the peak
        is too broad to have half-power points.
    note : str
        Nearest 12-TET note (A4 = 440 Hz).
    cents : float
        Offset from that note, cents.
    shape : ndarray
        Relative pressure at each hole (signed; max |value| = 1).
    nodes_m : ndarray
        Positions of the pressure nodes from the driven end, m.
    flame_peaks : int
        Number of flame peaks along the row of holes (nodes within the row).
    peak_spacing_m : float or None
        Distance between flame peaks (half a wavelength), m; ``None`` for n = 0.
    pattern : str
        ``"breathing"`` (n = 0: all flames pulse together), ``"unresolved"``
        (fewer than 4 holes per half-wavelength), ``"no holes"`` or ``"readable"``.
    """

    n: int
    frequency_hz: float
    q: float | None
    note: str
    cents: float
    shape: np.ndarray
    nodes_m: np.ndarray
    flame_peaks: int
    peak_spacing_m: float | None
    pattern: str

    @property
    def bandwidth_hz(self) -> float | None:
        return None if self.q is None else self.frequency_hz / self.q


def _zin_power(model: TubeModel, freq_hz: np.ndarray) -> np.ndarray:
    """|Z_in|^2 on any array of frequencies, in one pass of the model."""
    flat = np.asarray(freq_hz, dtype=float)
    return (np.abs(model.response(flat.ravel()).input_impedance) ** 2).reshape(flat.shape)


def _peaks(model: TubeModel, f_lo: float, f_hi: float) -> np.ndarray:
    """Frequencies of the local maxima of |Z_in|, refined to ~0.01 cent."""
    step = 2e-3  # relative grid step, 3.5 cents
    grid = np.exp(np.arange(np.log(f_lo), np.log(f_hi) + step, step))
    power = _zin_power(model, grid)
    idx = np.where((power[1:-1] > power[:-2]) & (power[1:-1] >= power[2:]))[0] + 1
    lo, hi = grid[idx - 1], grid[idx + 1]
    best = grid[idx]
    for _ in range(3):  # zoom in three times on 41-point grids, all peaks at once
        fine = lo[:, None] + (hi - lo)[:, None] * np.linspace(0.0, 1.0, 41)[None, :]
        j = np.clip(np.argmax(_zin_power(model, fine), axis=1), 1, 39)
        rows = np.arange(len(idx))
        best, lo, hi = fine[rows, j], fine[rows, j - 1], fine[rows, j + 1]
    return best


def _quality(model: TubeModel, f0: np.ndarray, bounds: np.ndarray) -> list:
    """Q = f0 / (f2 - f1) at the half-power points of |Z_in|^2, or None per peak.

    ``bounds`` holds the neighbouring peaks (or search ends) below and above
    each peak; a half-power point must be reached before them, with the
    response falling all the way, or the peak has no Q.
    """
    if f0.size == 0:
        return []
    peak = _zin_power(model, f0)
    # a first guess of Q from the curvature of a Lorentzian at the peak
    d = 1e-4
    side = _zin_power(model, f0[:, None] * np.array([1.0 - d, 1.0 + d])[None, :])
    curv = (side[:, 0] + side[:, 1] - 2.0 * peak) / d ** 2
    q_guess = np.sqrt(np.clip(-curv / (8.0 * peak), 0.25, 1e8))
    span = np.minimum(0.7, 6.0 / q_guess)
    steps = np.linspace(0.0, 1.0, 301)[None, :]
    lows = f0[:, None] * np.exp(-span[:, None] * steps)
    highs = f0[:, None] * np.exp(span[:, None] * steps)
    power = _zin_power(model, np.concatenate([lows, highs], axis=1)) / peak[:, None]
    result = []
    for k in range(f0.size):
        edges = []
        for grid, pw, limit, above in ((lows[k], power[k, :301], bounds[k, 0], False),
                                       (highs[k], power[k, 301:], bounds[k, 1], True)):
            below = np.where(pw <= 0.5)[0]
            if below.size == 0:
                break
            i = below[0]
            past = grid[i] > limit if above else grid[i] < limit
            if past or np.any(np.diff(pw[:i + 1]) > 0):
                break
            frac = (pw[i - 1] - 0.5) / (pw[i - 1] - pw[i])
            edges.append(grid[i - 1] + frac * (grid[i] - grid[i - 1]))
        result.append(float(f0[k] / (edges[1] - edges[0])) if len(edges) == 2 else None)
    return result


def _real_shape(p: np.ndarray) -> np.ndarray:
    """Project a complex standing wave onto its principal real axis."""
    theta = 0.5 * np.angle(np.sum(p * p))
    s = np.real(p * np.exp(-1j * theta))
    return s / np.max(np.abs(s))


def _zero_crossings(x: np.ndarray, s: np.ndarray) -> np.ndarray:
    idx = np.where(np.sign(s[:-1]) * np.sign(s[1:]) < 0)[0]
    return x[idx] - s[idx] * (x[idx + 1] - x[idx]) / (s[idx + 1] - s[idx])


def find_modes(model: TubeModel, f_max_hz: float | None = None) -> list[Mode]:
    """All resonances of the tube from 5 Hz up to the plane-wave limit.

    Parameters
    ----------
    model : TubeModel
    f_max_hz : float, optional
        Upper end of the search, Hz; never above the plane-wave limit.

    The search is kept per geometry, gas and ``f_max_hz`` (the views, the checks and the
    scan ask for the same tube's modes many times); the modes' arrays are read-only.
    """
    return list(_modes(model.geometry, model.gas, None if f_max_hz is None else float(f_max_hz)))


@lru_cache(maxsize=32)
def _modes(geometry, gas, f_max_hz: float | None) -> tuple[Mode, ...]:
    model = TubeModel(geometry, gas)
    g = geometry
    f_hi = model.plane_wave_limit_hz if f_max_hz is None else min(f_max_hz, model.plane_wave_limit_hz)
    peaks = _peaks(model, SEARCH_FLOOR_HZ, f_hi)
    edges = np.concatenate([[SEARCH_FLOOR_HZ], peaks, [f_hi]])
    qs = _quality(model, peaks, np.stack([edges[:-2], edges[2:]], axis=1))
    c = model.gas.sound_speed_m_s
    n_probe = int(np.clip(16 * 2 * f_hi * g.length_m / c, 64, 4000))
    probe = np.linspace(0.0, g.length_m, n_probe)
    resp = model.response(peaks, points_m=probe) if peaks.size else None
    modes = []
    for k, f0 in enumerate(peaks.tolist()):
        along = _real_shape(resp.point_pressure[:, k])
        nodes = _zero_crossings(probe, along)
        n = int(nodes.size)
        if g.hole_count:
            holes = resp.hole_pressure[:, k]
            theta = 0.5 * np.angle(np.sum(resp.point_pressure[:, k] ** 2))
            shape = np.real(holes * np.exp(-1j * theta))
            shape = shape / np.max(np.abs(shape))
            first, last = g.positions[0], g.positions[-1]
            in_row = int(np.sum((nodes >= first) & (nodes <= last)))
        else:
            shape = np.zeros(0)
            in_row = 0
        if n == 0:
            spacing = None
        elif n >= 2:
            spacing = float(np.mean(np.diff(nodes)))
        else:
            spacing = g.length_m
        if g.hole_count == 0:
            pattern = "no holes"
        elif n == 0:
            pattern = "breathing"
        elif g.hole_count < 2 or spacing / g.mean_hole_spacing_m < MIN_HOLES_PER_HALF_WAVE:
            pattern = "unresolved"
        else:
            pattern = "readable"
        q = qs[k]
        note, off = nearest_note(f0)
        shape.flags.writeable = False
        nodes.flags.writeable = False
        modes.append(Mode(n=n, frequency_hz=f0, q=q, note=note, cents=off, shape=shape,
                          nodes_m=nodes, flame_peaks=in_row, peak_spacing_m=spacing,
                          pattern=pattern))
    return tuple(modes)
