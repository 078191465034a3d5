"""An independent re-simulation of a damped flame tube for the issue-13 tests.

Written apart from showkit's own model, from the published formulas, with scipy's
Bessel functions and explicit 2 x 2 chain matrices (not showkit's state-carrying
loop, nor its numpy-only Bessel approximations):

- bore and hole bore: Zwikker & Kosten's low-reduced-frequency line constants
  (Keefe, JASA 75, 58-62, 1984, eqs. 1-4), ``F(z) = 2 J1(z) / (z J0(z))`` with
  ``scipy.special.jv``;
- each hole: its bore, its end-correction mass divided by Howe's bias-flow factor
  (Howe, Proc. R. Soc. A 366, 1979, in the form quoted by Eldredge & Dowling,
  JFM 485, 2003; ``scipy.special.iv`` and ``kv``), the unflanged radiation resistance
  ``rho c (k b)^2 / (4 S)`` (Levine & Schwinger 1948) and an extra resistance;
- chain matrices ``[[cosh, Zc sinh], [sinh / Zc, cosh]]`` per section and
  ``[[1, 0], [1 / Zh, 1]]`` per hole, multiplied from the rigid cap (U = 0) back to the
  membrane; the pressure at every hole per unit volume velocity at the membrane;
- the drive: the second-order band-pass of the README, scaled so that the calibration
  sine gives the calibration pressure at the cap;
- the pressure over time: the whole signal, zero-padded for the ring-down, through an
  FFT at the signal's own rate (no envelope: the true dip below the static level).

The geometry, the gas properties and the end correction are inputs (the rig's): the
gas is checked against CoolProp in test_gas.py, the end correction is Dalmont et al.'s.
"""

from __future__ import annotations

import numpy as np
import scipy.special as sp


def _zk(z):
    # exponentially scaled Bessel functions: the ratio is the same, without overflow
    return 2.0 * sp.jve(1, z) / (z * sp.jve(0, z))


def _line(omega, radius, gas):
    rho, c, mu = gas.density_kg_m3, gas.sound_speed_m_s, gas.viscosity_pa_s
    area = np.pi * radius ** 2
    kv = np.sqrt(-1j * omega * rho / mu)
    zs = 1j * omega * rho / (area * (1 - _zk(kv * radius)))
    ys = 1j * omega * area / (rho * c * c) * (1 + (gas.gamma - 1) * _zk(kv * np.sqrt(gas.prandtl) * radius))
    return zs, ys


def howe(st):
    """Howe's gamma - i delta (exp(-i omega t)), directly from scipy's Bessel functions."""
    a = np.pi / 2 * sp.iv(1, st) * np.exp(-st)
    return 1 + (a - 1j * sp.kv(1, st) * np.sinh(st)) / (st * (a + 1j * sp.kv(1, st) * np.cosh(st)))


def hole_impedance(omega, geometry, gas, flow_m_s, resistance):
    b = geometry.hole_radius_m
    area = np.pi * b * b
    rho, c = gas.density_kg_m3, gas.sound_speed_m_s
    zs, _ = _line(omega, b, gas)
    mass = 1j * omega * rho * geometry.end_correction_m / area
    if flow_m_s > 0:
        mass = mass / np.conj(howe(omega * b / flow_m_s))  # to exp(+j omega t)
    return zs * geometry.wall_m + mass + rho * c * (omega / c * b) ** 2 / (4 * area) + resistance


def hole_transfer(freq_hz, geometry, gas, flow_m_s=0.0, resistance=0.0, bore_q=None):
    """Pressure at every hole and at the cap per unit volume velocity at the membrane.

    ``bore_q``: an extra loss spread uniformly along the bore, attenuation ``k / (2 Q)``
    (every mode's Q then contains ``1 / bore_q``): issue 13's "real tube with extra
    uniform loss".
    """
    f = np.asarray(freq_hz, dtype=float)
    omega = 2 * np.pi * f
    zs, ys = _line(omega, geometry.radius_m, gas)
    g = np.sqrt(zs * ys)
    g = np.where(g.real < 0, -g, g)
    if bore_q:
        g = g + omega / gas.sound_speed_m_s / (2 * bore_q)
    zc = np.sqrt(zs / ys)
    zh = hole_impedance(omega, geometry, gas, flow_m_s, resistance)

    sections = {}  # distance -> matrix: evenly spaced holes share one (computed once, same values)

    def section(d):
        if d not in sections:
            m = np.empty((f.size, 2, 2), dtype=complex)
            m[:, 0, 0] = m[:, 1, 1] = np.cosh(g * d)
            m[:, 0, 1] = zc * np.sinh(g * d)
            m[:, 1, 0] = np.sinh(g * d) / zc
            sections[d] = m
        return sections[d]

    shunt = np.zeros((f.size, 2, 2), dtype=complex)
    shunt[:, 0, 0] = shunt[:, 1, 1] = 1.0
    shunt[:, 1, 0] = 1.0 / zh
    xs = list(geometry.positions)
    state = np.zeros((f.size, 2), dtype=complex)
    state[:, 0] = 1.0                      # p = 1, U = 0 at the rigid cap
    here = geometry.length_m
    at_holes = []
    for x in reversed(xs):
        state = np.einsum("fij,fj->fi", section(here - x), state)
        at_holes.append(state[:, 0].copy())
        state = np.einsum("fij,fj->fi", shunt, state)
        here = x
    state = np.einsum("fij,fj->fi", section(here), state)
    u0 = state[:, 1]
    holes = np.array(at_holes[::-1]) / u0[None, :]
    return holes, 1.0 / u0


def drive_shape(freq_hz, drive):
    w = 2 * np.pi * np.asarray(freq_hz, dtype=float)
    ws = 2 * np.pi * drive.speaker_resonance_hz
    return 1j * w * ws / (ws * ws - w * w + 1j * w * ws / drive.speaker_q)


def calibrated(freq_hz, rig, flow_m_s, resistance, bore_q=None):
    """Pa at every hole per unit digital amplitude, calibrated with the rig's reading."""
    d = rig.drive
    holes, cap = hole_transfer(freq_hz, rig.geometry, rig.gas, flow_m_s, resistance, bore_q)
    _, cap_ref = hole_transfer([d.reference_frequency_hz], rig.geometry, rig.gas, flow_m_s, resistance, bore_q)
    amp = 10 ** (d.reference_level_dbfs / 20)
    k = d.reference_pressure_pa / (amp * abs(drive_shape([d.reference_frequency_hz], d)[0] * cap_ref[0]))
    return holes * (k * drive_shape(freq_hz, d))[None, :]


def transfer_grid(rig, m, rate_hz, flow_m_s, resistance, bore_q=None):
    """:func:`calibrated` on the one-sided grid of an FFT of size ``m`` (zero at DC)."""
    f = np.fft.rfftfreq(m, 1 / rate_hz)
    g = np.zeros((rig.geometry.hole_count, f.size), dtype=complex)
    g[:, 1:] = calibrated(f[1:], rig, flow_m_s, resistance, bore_q)
    return g


def true_ceiling_db(rig, x, g, m):
    """The largest gain keeping every hole at or above reserve x static, by direct convolution of
    the whole signal (zero-padded to ``m``, which must hold the signal and the ring-down)."""
    p = np.fft.irfft(np.fft.rfft(x, m)[None, :] * g, m, axis=1)
    dip = float(-p.min())
    return 20 * np.log10((1 - rig.reserve) * rig.static_pa / dip)


def steady_ceiling_db(rig, freq_hz, amplitude, flow_m_s, resistance, bore_q=None):
    """Steady-state ceiling of a sine of ``amplitude`` at each frequency (no transients)."""
    g = np.abs(calibrated(np.atleast_1d(freq_hz), rig, flow_m_s, resistance, bore_q)).max(axis=0)
    return 20 * np.log10((1 - rig.reserve) * rig.static_pa / (amplitude * g))


def cap_level_db(rig, freq_hz, flow_m_s, resistance):
    _, cap = hole_transfer([freq_hz], rig.geometry, rig.gas, flow_m_s, resistance)
    return 20 * np.log10(abs(cap[0]))
