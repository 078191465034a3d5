"""Resonances and their Q from a measured frequency response.

Method
------
1. Peaks of ``|H|`` with at least ``min_prominence_db`` of prominence
   (scipy.signal.find_peaks) give candidates; the half-power bandwidth
   around each (the -3 dB points, not past a neighbouring peak) gives a first
   Q (DEVELOPERS.md Methods §9).
2. Each candidate is refined by a least-squares fit of the complex response
   near it to the resonator of DEVELOPERS.md Methods §8,

       H(f) = exp(-j 2 pi f d) [ sum_m A_m / (1 + j Q_m (f / f_m - f_m / f)) + B0 + B1 u ]

   with ``u = (f - f_k) / f_k`` (a sum over the candidate and the neighbours
   that fall in its window, a complex amplitude ``A_m`` each, a straight-line background ``B0 + B1 u`` for
   the tails of the other modes, and a small delay ``d``): a modal
   (rational) fit, as in experimental modal analysis (D. J. Ewins, *Modal
   Testing*, 2nd ed., 2000, ch. 4, circle-fit and curve-fit methods).
   ``f_m`` and ``Q_m`` are the resonator's own frequency and Q, unbiased by
   the drive's slope and the neighbours' tails, where the half-power
   bandwidth is biased by both.
3. A candidate whose fit fails or that stands no clear of the fit's
   residual is dropped; one whose Q the window cannot hold keeps the
   half-power value and says so (``q_method``).

``level_db`` is ``20 log10 |A|``: the resonance's peak response in dB re one
(recorded full scale per played full scale).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Peaks less prominent than this (dB) are not taken as resonances.
MIN_PROMINENCE_DB = 1.0
#: Peaks must stand this far above the noise (dB) to count.
NOISE_MARGIN_DB = 15.0
#: A peak must rise this many times the noise magnitude above its base.
NOISE_FACTOR = 6.0
#: Half-width of the fit window, in bandwidths (f/Q) of the candidate.
WINDOW_BANDWIDTHS = 1.5
#: Most points used in one local fit.
MAX_FIT_POINTS = 600


@dataclass(frozen=True)
class Resonance:
    """One measured resonance.

    Attributes
    ----------
    frequency_hz : float
    q : float
    level_db : float
        Peak response of the resonance, dB re 1 (see module docstring).
    q_method : str
        ``"resonator fit"`` or ``"half-power"``.
    """

    frequency_hz: float
    q: float
    level_db: float
    q_method: str = "resonator fit"


def half_power_q(freq_hz: np.ndarray, power: np.ndarray, k: int, lo: int, hi: int) -> float | None:
    """Q from the half-power points of ``power`` around index ``k``.

    Searches outwards from the peak, not past indices ``lo``/``hi`` (the
    neighbouring peaks) and not where the response rises again; linear
    interpolation between samples.  ``None`` when a side has no half-power
    point.

    Parameters
    ----------
    freq_hz : ndarray
        Frequencies, Hz, ascending.
    power : ndarray
        ``|H|^2`` on that grid.
    k, lo, hi : int
        Peak index and search limits.
    """
    half = power[k] / 2.0
    edges = []
    for step, stop in ((-1, lo), (1, hi)):
        idx = np.arange(k, stop, step)
        if idx.size < 2:
            return None
        below = np.where(power[idx] <= half)[0]
        if below.size == 0:
            return None
        j = below[0]
        a, b = idx[j - 1], idx[j]
        frac = (power[a] - half) / (power[a] - power[b])
        edges.append(freq_hz[a] + frac * (freq_hz[b] - freq_hz[a]))
    width = edges[1] - edges[0]
    return float(freq_hz[k] / width) if width > 0 else None


def _fit_local(f: np.ndarray, h: np.ndarray, centres: np.ndarray, qs: np.ndarray, main: int,
               f_ref: float):
    """Least-squares fit of a few resonators + line + delay; returns (f, Q, A) of ``main``."""
    from scipy.optimize import least_squares

    m = centres.size
    amp0 = np.interp(centres, f, h.real) + 1j * np.interp(centres, f, h.imag)
    x0 = np.concatenate([[0.0], np.zeros(m), np.log(qs), amp0.real, amp0.imag, np.zeros(4)])
    scale_h = np.max(np.abs(h))
    u = (f - f_ref) / f_ref

    def model(p):
        delay = p[0] * 1e-3
        fm = centres * np.exp(p[1:1 + m] / qs)
        qm = np.exp(p[1 + m:1 + 2 * m])
        am = p[1 + 2 * m:1 + 3 * m] + 1j * p[1 + 3 * m:1 + 4 * m]
        b0 = p[-4] + 1j * p[-3]
        b1 = p[-2] + 1j * p[-1]
        total = (am[None, :] / (1.0 + 1j * qm[None, :] * (f[:, None] / fm[None, :] - fm[None, :] / f[:, None]))).sum(1)
        return (np.exp(-2j * np.pi * f * delay) * (total + b0 + b1 * u),
                fm, qm, am)

    def resid(p):
        r = (model(p)[0] - h) / scale_h
        return np.concatenate([r.real, r.imag])

    def jac(p):
        # the model's derivatives in closed form (differentiating the expression above):
        # one evaluation per step where a finite-difference Jacobian took 1 + len(p)
        delay = p[0] * 1e-3
        fm = centres * np.exp(p[1:1 + m] / qs)
        qm = np.exp(p[1 + m:1 + 2 * m])
        am = p[1 + 2 * m:1 + 3 * m] + 1j * p[1 + 3 * m:1 + 4 * m]
        ratio = f[:, None] / fm[None, :]
        d = 1.0 + 1j * qm[None, :] * (ratio - 1.0 / ratio)
        e = np.exp(-2j * np.pi * f * delay)[:, None]
        inner = (am[None, :] / d).sum(1) + p[-4] + 1j * p[-3] + (p[-2] + 1j * p[-1]) * u
        over_d = e / d
        over_d2 = over_d * am[None, :] / d
        cols = np.empty((f.size, p.size), dtype=complex)
        cols[:, 0] = -2j * np.pi * f * 1e-3 * e[:, 0] * inner
        cols[:, 1:1 + m] = over_d2 * 1j * qm[None, :] * (ratio + 1.0 / ratio) / qs[None, :]
        cols[:, 1 + m:1 + 2 * m] = -over_d2 * (d - 1.0)
        cols[:, 1 + 2 * m:1 + 3 * m] = over_d
        cols[:, 1 + 3 * m:1 + 4 * m] = 1j * over_d
        cols[:, -4], cols[:, -3] = e[:, 0], 1j * e[:, 0]
        cols[:, -2], cols[:, -1] = e[:, 0] * u, 1j * e[:, 0] * u
        cols /= scale_h
        return np.concatenate([cols.real, cols.imag])

    sol = least_squares(resid, x0, jac=jac, method="lm", x_scale="jac", max_nfev=100 * x0.size)
    fitted, fm, qm, am = model(sol.x)
    rms = np.sqrt(np.mean(np.abs(fitted - h) ** 2))
    return fm[main], qm[main], am[main], rms


def find_resonances(freq_hz: np.ndarray, response: np.ndarray, f_min_hz: float | None = None,
                    f_max_hz: float | None = None,
                    min_prominence_db: float = MIN_PROMINENCE_DB,
                    noise=None) -> list[Resonance]:
    """The resonances of a measured response, with frequency, Q and level.

    Parameters
    ----------
    freq_hz : ndarray
        Uniform frequency grid, Hz, ascending, all > 0.
    response : ndarray of complex
        Measured response on that grid (any scale).
    f_min_hz, f_max_hz : float, optional
        Only report resonances within this range, Hz.
    min_prominence_db : float
        Smallest peak prominence taken as a resonance, dB.
    noise : ndarray, optional
        Expected noise magnitude at each frequency; peaks less than
        ``NOISE_MARGIN_DB`` above it are not taken.
    """
    from scipy.signal import find_peaks

    f = np.asarray(freq_hz, dtype=float)
    h = np.asarray(response, dtype=complex)
    power = np.abs(h) ** 2
    level = 10.0 * np.log10(np.maximum(power, power.max() * 1e-20))
    # noise ripple is narrower than a resonance of Q < 2000 at the top of the band
    peaks, props = find_peaks(level, prominence=min_prominence_db, width=2.0)
    if noise is not None and peaks.size:
        # the rise above the higher base must be more than noise can make
        mag = np.abs(h)
        base = np.maximum(mag[props["left_bases"]], mag[props["right_bases"]])
        nz = np.asarray(noise)[peaks]
        clear = (mag[peaks] - base > NOISE_FACTOR * nz) & (
            mag[peaks] > nz * 10 ** (NOISE_MARGIN_DB / 20.0))
        peaks = peaks[clear]
    lo_f = f[0] if f_min_hz is None else f_min_hz
    hi_f = f[-1] if f_max_hz is None else f_max_hz
    bounds = np.concatenate([[0], peaks, [f.size - 1]])
    found = []
    for j, k in enumerate(peaks):
        if not lo_f <= f[k] <= hi_f:
            continue
        q_hp = half_power_q(f, power, k, bounds[j], bounds[j + 2])
        q0 = q_hp if q_hp is not None else _curvature_q(f, power, k)
        half = WINDOW_BANDWIDTHS * f[k] / q0
        w_lo, w_hi = f[k] - half, f[k] + half
        sel = np.where((f >= max(w_lo, f[0])) & (f <= min(w_hi, f[-1])))[0]
        if sel.size < 8:
            continue
        stride = max(1, sel.size // MAX_FIT_POINTS)
        sel = sel[::stride]
        near = [i for i in peaks if w_lo <= f[i] <= w_hi]
        centres = f[near]
        qs = np.array([(half_power_q(f, power, i, 0, f.size - 1) or q0) if i != k else q0 for i in near])
        qs = np.clip(qs, 1.0, 1e5)
        main = near.index(k)
        try:
            f_fit, q_fit, a_fit, rms = _fit_local(f[sel], h[sel], centres, qs, main, f[k])
        except (ValueError, np.linalg.LinAlgError):
            f_fit, q_fit, a_fit, rms = np.nan, np.nan, np.nan, np.inf
        good = (np.isfinite(f_fit) and abs(f_fit - f[k]) < half and 0.5 < q_fit < 1e5
                and np.abs(a_fit) > 3.0 * rms)
        if good:
            found.append(Resonance(float(f_fit), float(q_fit), float(20 * np.log10(np.abs(a_fit)))))
        elif q_hp is not None:
            found.append(Resonance(float(f[k]), float(q_hp), float(level[k]), "half-power"))
    return found


def _curvature_q(f: np.ndarray, power: np.ndarray, k: int) -> float:
    """Q from the curvature of a Lorentzian ``|H|^2`` at its peak (fallback)."""
    k = int(np.clip(k, 1, f.size - 2))
    d = f[k + 1] - f[k]
    curv = (power[k + 1] + power[k - 1] - 2.0 * power[k]) / d ** 2
    # |H|^2 = P / (1 + 4 Q^2 (f - f0)^2 / f0^2)  ->  curvature = -8 P Q^2 / f0^2
    q2 = -curv * f[k] ** 2 / (8.0 * power[k])
    return float(np.sqrt(np.clip(q2, 1.0, 1e8)))
