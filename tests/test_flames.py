"""Flame heights (DEVELOPERS.md Methods §6): closed form, frame averages, contrast."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.special
from hypothesis import given, settings
from hypothesis import strategies as st

from showkit.physics.flames import (elliptic_e, frame_flames, relative_flow, row_contrast,
                                    sine_flame_height)

RATIOS = [0.0, 0.5, 0.8, 1.0]


def test_elliptic_e_matches_scipy():
    m = np.concatenate([np.linspace(0.0, 1.0, 101), [1e-12, 0.999999, 0.5 + 1e-9]])
    # reference: scipy.special.ellipe (parameter m convention, DLMF 19.2.8)
    np.testing.assert_allclose(elliptic_e(m), scipy.special.ellipe(m), rtol=1e-12, atol=0)


def test_elliptic_e_known_values():
    # E(0) = pi/2 and E(1) = 1 (DLMF 19.6.1)
    assert elliptic_e(0.0) == pytest.approx(math.pi / 2, rel=1e-15)
    assert elliptic_e(1.0) == 1.0


@pytest.mark.parametrize("r", RATIOS)
def test_sine_closed_form_matches_scipy_ellipe(r):
    # DEVELOPERS.md Methods §6: (2/pi) sqrt(1+r) E(2r/(1+r)), E from scipy.special.ellipe
    expected = 2.0 / math.pi * math.sqrt(1.0 + r) * scipy.special.ellipe(2.0 * r / (1.0 + r))
    assert float(sine_flame_height(r)) == pytest.approx(expected, rel=1e-3)
    assert float(sine_flame_height(r)) == pytest.approx(expected, rel=1e-12)


@pytest.mark.parametrize("r, value", [(0.0, 1.0), (0.5, 0.98334), (1.0, 2 * math.sqrt(2) / math.pi)])
def test_sine_closed_form_check_values(r, value):
    # check values quoted in DEVELOPERS.md Methods §6 (r = 1 -> 2 sqrt(2)/pi = 0.90032)
    assert float(sine_flame_height(r)) == pytest.approx(value, rel=1e-5)


def test_sine_closed_form_refuses_r_above_one():
    with pytest.raises(ValueError):
        sine_flame_height(1.2)


@pytest.mark.parametrize("r", RATIOS)
def test_frame_flames_of_a_sampled_sine_match_the_closed_form(r):
    """Numerical frame averages of the real model on a sampled sine, against the closed form."""
    static = 20.0
    frame = 4800  # 10 whole periods of 480 samples per frame
    n = 3 * frame
    t = np.arange(n)
    pressure = r * static * np.sin(2 * np.pi * t / 480 + 0.3)
    height, air_in = frame_flames(np.vstack([pressure, -pressure]), static, frame)
    assert height.shape == (3, 2)
    # closed form, DEVELOPERS.md Methods §6 (Gradshteyn & Ryzhik 2.576), within 0.1 %
    np.testing.assert_allclose(height, float(sine_flame_height(r)), rtol=1e-3)
    assert np.all(air_in == 0.0)


def test_frame_flames_air_drawn_in_fraction():
    # r = 2: 1 + 2 sin t < 0 when sin t < -1/2, i.e. 1/3 of each period (elementary)
    frame = 4800
    t = np.arange(frame) + 0.5
    pressure = 2.0 * 10.0 * np.sin(2 * np.pi * t / 480)
    height, air_in = frame_flames(pressure[None, :], 10.0, frame)
    assert air_in[0, 0] == pytest.approx(1.0 / 3.0, abs=2e-3)
    # the mean of sqrt(max(0, 1 + 2 sin t)) by brute-force quadrature (numpy, fine grid)
    fine = np.linspace(0, 2 * np.pi, 2_000_001)[:-1]
    expected = np.sqrt(np.maximum(0.0, 1 + 2 * np.sin(fine))).mean()
    assert height[0, 0] == pytest.approx(expected, rel=1e-3)


def test_frame_flames_gain_and_overwrite_agree_with_scaled_pressure():
    rng = np.random.default_rng(5)
    p = rng.standard_normal((4, 640)) * 3.0
    h1, a1 = frame_flames(2.5 * p, 10.0, 160)
    h2, a2 = frame_flames(p, 10.0, 160, gain=2.5)
    scratch = p.astype(np.float32)
    h3, a3 = frame_flames(scratch, 10.0, 160, gain=2.5, overwrite=True)
    np.testing.assert_allclose(h1, h2, rtol=1e-6)
    np.testing.assert_allclose(h1, h3, rtol=1e-5)
    np.testing.assert_array_equal(a1, a2)
    np.testing.assert_array_equal(a1, a3)
    assert a1.max() > 0  # the case tested includes air drawn in
    # against the definition, sample by sample
    direct = relative_flow(2.5 * p, 10.0).reshape(4, 4, 160).mean(axis=2).T
    np.testing.assert_allclose(h1, direct, rtol=1e-6)


def test_frame_flames_ignores_a_partial_last_frame_and_leaves_input_alone():
    p = np.ones((2, 350))
    keep = p.copy()
    height, _ = frame_flames(p, 1.0, 160)
    assert height.shape == (2, 2)
    np.testing.assert_allclose(height, math.sqrt(2.0), rtol=1e-6)
    np.testing.assert_array_equal(p, keep)


def test_row_contrast():
    # definition (README): (tallest - shortest) / tallest per frame
    height = np.array([[1.0, 1.0, 1.0], [1.0, 0.9, 0.95], [0.5, 0.0, 0.2], [0.0, 0.0, 0.0]])
    np.testing.assert_allclose(row_contrast(height), [0.0, 0.1, 1.0, 0.0], atol=1e-12)
    assert row_contrast(np.zeros((3, 0))).shape == (3,)


def test_contrast_of_a_safe_standing_wave_is_at_most_about_ten_percent():
    # DEVELOPERS.md Methods §6: at r <= 1 the contrast is at most 1 - 2 sqrt(2)/pi (about 10 %)
    heights = sine_flame_height(np.linspace(0, 1, 41))[None, :]
    c = float(row_contrast(heights)[0])
    assert c == pytest.approx(1 - 2 * math.sqrt(2) / math.pi, rel=1e-9)


@settings(max_examples=25, deadline=None)
@given(st.floats(0.0, 1.0), st.floats(0.0, 1.0))
def test_sine_flame_height_falls_with_amplitude(r1, r2):
    # a larger swing always lowers the mean flow (sqrt is concave: Jensen)
    lo, hi = sorted([r1, r2])
    assert float(sine_flame_height(hi)) <= float(sine_flame_height(lo)) + 1e-15
    assert 2 * math.sqrt(2) / math.pi - 1e-12 <= float(sine_flame_height(hi)) <= 1.0
