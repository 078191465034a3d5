"""Lossy plane-wave lines (showkit.physics.lines): own Bessel ratio vs scipy, wide-tube limit."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.special import jve

from showkit.physics.gas import gas_state
from showkit.physics.lines import (boundary_layer_attenuation, line_constants, propagation,
                                   zk_function)


def scipy_zk(z):
    """2 J1(z) / (z J0(z)) with scipy; the exponentially scaled jve keeps large |z| finite
    (the scale factor exp(-|Im z|) cancels in the ratio)."""
    z = np.asarray(z, dtype=complex)
    return 2.0 * jve(1, z) / (z * jve(0, z))


def test_zk_function_matches_scipy_over_the_whole_range():
    # reference: scipy.special.jv/jve (Amos library); argument k a with k = sqrt(-j omega rho / mu)
    r = np.geomspace(0.05, 500.0, 5000)
    z = r * np.exp(-1j * np.pi / 4)
    err = np.abs(zk_function(z) / scipy_zk(z) - 1.0)
    assert np.max(err) < 1e-8


def test_zk_function_around_the_series_asymptotic_switch():
    # the two branches (power series, Hankel expansion) meet at |z| = 14: no jump there
    r = np.linspace(13.0, 15.0, 2001)
    z = r * np.exp(-1j * np.pi / 4)
    assert np.max(np.abs(zk_function(z) / scipy_zk(z) - 1.0)) < 1e-8


def test_zk_function_for_wide_tubes():
    # a 40 mm radius bore at 1 kHz in propane has |k_v a| ~ 1500: still accurate (scipy jve reference)
    r = np.geomspace(500.0, 1e5, 400)
    z = r * np.exp(-1j * np.pi / 4)
    got = zk_function(z)
    assert np.all(np.isfinite(got))
    assert np.max(np.abs(got / scipy_zk(z) - 1.0)) < 1e-8


@settings(max_examples=60, deadline=None)
@given(r=st.floats(0.05, 500.0), angle=st.floats(-np.pi / 2 + 0.01, -np.pi / 4))
def test_zk_function_lower_half_plane(r, angle):
    # scipy reference.  Physical arguments all have angle -pi/4 (k_v and k_t are sqrt(-j) times
    # a real number); the Hankel branch also holds further down, where H^(2) is smaller still.
    # (Near the real axis it would not: there J ~ H^(1) fails; no physical argument lies there.)
    z = np.array([r * np.exp(1j * angle)])
    assert abs(zk_function(z)[0] / scipy_zk(z)[0] - 1.0) < 1e-7


def test_zk_function_small_argument_limit():
    # F(z) = 2 J1 / (z J0) -> 1 + z^2/8 for small z (series of J0, J1; A&S 9.1.10)
    z = np.array([1e-4, 1e-3]) * np.exp(-1j * np.pi / 4)
    assert np.allclose(zk_function(z), 1.0 + z ** 2 / 8.0, rtol=1e-12, atol=0)


@pytest.mark.parametrize("fuel, radius_m", [("propane", 0.0375), ("air", 0.0375), ("air", 0.05),
                                            ("methane", 0.025)])
def test_wide_tube_attenuation_matches_boundary_layer_formula(fuel, radius_m):
    # Kinsler, Frey, Coppens & Sanders: alpha = (1/(a c)) sqrt(omega nu / 2)(1 + (gamma-1)/sqrt(Pr))
    # (DEVELOPERS.md Methods §3); the Zwikker-Kosten line tends to it for wide tubes (Keefe 1984)
    gas = gas_state(fuel, 0.0, 293.15)
    omega = 2 * np.pi * np.array([50.0, 100.0, 300.0, 1000.0, 2000.0])
    gamma, _ = propagation(omega, radius_m, gas)
    alpha = boundary_layer_attenuation(omega, radius_m, gas)
    assert np.allclose(gamma.real / alpha, 1.0, atol=0.02)
    # DEVELOPERS.md Methods §3: the phase speed is lowered by about the same relative amount alpha c / omega
    c = gas.sound_speed_m_s
    slowdown = 1.0 - omega / gamma.imag / c
    assert np.allclose(slowdown / (alpha * c / omega), 1.0, atol=0.03)


def test_narrow_tube_departs_from_wide_tube_formula():
    # the boundary-layer formula holds only for wide tubes (Keefe 1984): a 0.2 mm radius duct
    # at 100 Hz (|k_v a| ~ 1.3) must differ from it by far more than the wide-tube few percent
    gas = gas_state("air", 0.0, 293.15)
    omega = np.array([2 * np.pi * 100.0])
    gamma, _ = propagation(omega, 2e-4, gas)
    assert abs(gamma.real[0] / boundary_layer_attenuation(omega, 2e-4, gas)[0] - 1.0) > 0.2


def test_lossless_limit_of_line_constants():
    # textbook plane waves (Kinsler et al.): Z' -> j omega rho / S, Y' -> j omega S / (rho c^2)
    gas = gas_state("air", 0.0, 293.15)
    a = 0.05
    omega = 2 * np.pi * np.array([100.0, 1000.0])
    z, y = line_constants(omega, a, gas)
    s = np.pi * a * a
    rho, c = gas.density_kg_m3, gas.sound_speed_m_s
    assert np.allclose(z.imag, omega * rho / s, rtol=5e-3)
    assert np.allclose(y.imag, omega * s / (rho * c * c), rtol=5e-3)
    assert np.all(z.real > 0) and np.all(y.real > 0)  # losses are losses
    gamma, zc = propagation(omega, a, gas)
    assert np.allclose(gamma.imag, omega / c, rtol=5e-3)
    assert np.allclose(zc.real, rho * c / s, rtol=5e-3)
