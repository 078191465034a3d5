"""Resonances and flame-pattern facts (showkit.physics.modes)."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from showkit.physics.gas import gas_state
from showkit.physics.geometry import TubeGeometry
from showkit.physics.modes import MIN_HOLES_PER_HALF_WAVE, find_modes
from showkit.physics.pitch import nearest_note
from showkit.physics.tube import FIRST_CROSS_MODE, TubeModel
from showkit.rigfile import load_rig


def uniform_tube(count: int = 79, hole_diameter_m: float = 0.0015, length_m: float = 2.0,
                 bore_m: float = 0.075) -> TubeGeometry:
    """Holes evenly along the whole tube (DEVELOPERS.md Methods §4 example by default)."""
    return TubeGeometry(length_m, bore_m, 0.002,
                        tuple(np.linspace(0.0, length_m, count + 2)[1:-1]), hole_diameter_m)


@pytest.fixture(scope="module")
def example_modes(air_20c):
    geom = uniform_tube()
    return geom, find_modes(TubeModel(geom, air_20c), 900.0)


@pytest.fixture(scope="module")
def demo():
    rig = load_rig()
    return rig, find_modes(rig.model)


def test_numbering_starts_at_breathing_mode_and_steps_by_one(example_modes, demo):
    # issue 2: n = 0 is the breathing mode the holes create, n >= 1 has n pressure nodes.
    # Issue 13: the demo rig's best estimate has the gas flowing out of the holes; their
    # mass gives way to a resistance (Howe 1979) and the breathing mode is gone: it starts at 1
    for (_, modes), first in ((example_modes, 0), (demo, 1)):
        assert [m.n for m in modes] == list(range(first, first + len(modes)))
        assert all(m.nodes_m.size == m.n for m in modes)
        freqs = [m.frequency_hz for m in modes]
        assert freqs == sorted(freqs)


def test_breathing_mode_facts(example_modes):
    # DEVELOPERS.md Methods §4: uniform pressure, every flame pulses together, no pattern
    _, modes = example_modes
    zero = modes[0]
    assert zero.n == 0 and zero.pattern == "breathing"
    assert zero.flame_peaks == 0 and zero.peak_spacing_m is None
    assert np.all(zero.shape > 0)  # in phase at every hole


def test_breathing_mode_is_uniform_without_losses():
    # DEVELOPERS.md Methods §4: omega^2 = omega_H^2 + c^2 k^2 with k = 0 for the breathing mode (uniform pressure)
    gas = dataclasses.replace(gas_state("air", 0.0, 293.15), viscosity_pa_s=1e-12)
    zero = find_modes(TubeModel(uniform_tube(), gas), 200.0)[0]
    assert zero.n == 0
    assert np.max(np.abs(zero.shape - 1.0)) < 0.05


def test_hole_shapes_follow_cosines(example_modes):
    # DEVELOPERS.md Methods §4: with holes spread evenly the dispersion relation keeps k = n pi / L, so the
    # pressure along the row is still cos(n pi x / L) (n >= 2; n = 1 mixes with the breathing mode)
    geom, modes = example_modes
    x = geom.positions
    for m in modes:
        assert m.shape.shape == (geom.hole_count,)
        assert np.max(np.abs(m.shape)) == pytest.approx(1.0)
        if m.n >= 2:
            s = m.shape * np.sign(m.shape[0])
            assert np.max(np.abs(s - np.cos(m.n * np.pi * x / geom.length_m))) < 0.05


def test_flame_peaks_and_spacing(example_modes):
    # DEVELOPERS.md Methods §6: flames tallest at pressure nodes, half a wavelength apart (L / n here)
    geom, modes = example_modes
    first, last = geom.positions[0], geom.positions[-1]
    for m in modes[1:]:
        assert m.flame_peaks == int(np.sum((m.nodes_m >= first) & (m.nodes_m <= last)))
        assert m.flame_peaks == m.n  # the row covers the tube: every node has flames over it
        assert m.peak_spacing_m == pytest.approx(geom.length_m / m.n, rel=0.02)
        if m.n >= 2:
            assert m.peak_spacing_m == pytest.approx(float(np.mean(np.diff(m.nodes_m))))


def test_flame_peaks_count_only_nodes_over_the_row(air_20c):
    # holes on the middle third only: the nodes outside the row show no flame peak
    geom = TubeGeometry(1.8, 0.075, 0.002, tuple(0.6 + 0.02 * np.arange(31)), 0.0015)
    modes = find_modes(TubeModel(geom, air_20c), 700.0)
    assert any(m.flame_peaks < m.n for m in modes)
    for m in modes:
        inside = (m.nodes_m >= geom.positions[0]) & (m.nodes_m <= geom.positions[-1])
        assert m.flame_peaks == int(inside.sum())


def test_unresolved_when_fewer_than_four_holes_per_half_wave(air_20c):
    # DEVELOPERS.md Methods §6: a readable pattern needs about 4 or more holes per half-wavelength
    # (common practice, no source); 10 holes 0.2 m apart on a 2 m tube
    geom = TubeGeometry(2.0, 0.075, 0.002, tuple(0.1 + 0.2 * np.arange(10)), 0.003)
    modes = find_modes(TubeModel(geom, air_20c), 1200.0)
    patterns = {m.pattern for m in modes}
    assert {"breathing", "readable", "unresolved"} <= patterns
    for m in modes[1:]:
        holes_per_half_wave = m.peak_spacing_m / 0.2
        expected = "unresolved" if holes_per_half_wave < MIN_HOLES_PER_HALF_WAVE else "readable"
        assert m.pattern == expected, m.n


def test_single_hole_is_unresolved(air_20c):
    geom = TubeGeometry(1.0, 0.05, 0.002, (0.5,), 0.003)
    modes = find_modes(TubeModel(geom, air_20c), 800.0)
    assert modes[0].n == 0  # one hole still makes a (Helmholtz-like) breathing mode
    assert all(m.pattern == "unresolved" for m in modes[1:])
    assert all(m.shape.shape == (1,) and abs(m.shape[0]) == pytest.approx(1.0) for m in modes)


def test_plain_pipe_patterns(air_20c):
    modes = find_modes(TubeModel(TubeGeometry(1.0, 0.05, 0.002), air_20c), 800.0)
    assert modes[0].n == 1  # no holes, no breathing mode
    assert all(m.pattern == "no holes" and m.flame_peaks == 0 and m.shape.size == 0 for m in modes)


def test_no_mode_above_the_plane_wave_limit():
    # Kinsler et al. / Morse & Ingard (DEVELOPERS.md Methods §3): first cross mode f_c = 1.841 c / (2 pi a)
    from CoolProp.CoolProp import PropsSI

    gas = gas_state("air", 0.0, 293.15)
    geom = uniform_tube(count=40, hole_diameter_m=0.004, length_m=1.3, bore_m=0.2)
    model = TubeModel(geom, gas)
    c_ref = PropsSI("A", "T", 293.15, "P", 101325.0, "Air")
    assert model.plane_wave_limit_hz == pytest.approx(1.841 * c_ref / (2 * np.pi * 0.1), rel=5e-3)
    assert FIRST_CROSS_MODE == pytest.approx(1.8412, abs=1e-4)  # first zero of J1' (A&S table 9.5)
    modes = find_modes(model)
    capped = find_modes(model, 5 * model.plane_wave_limit_hz)
    assert [m.frequency_hz for m in capped] == pytest.approx([m.frequency_hz for m in modes])
    assert modes[-1].frequency_hz < model.plane_wave_limit_hz
    # and nothing is missing just below it: the next mode up would be above the limit
    spacing = modes[-1].frequency_hz - modes[-2].frequency_hz
    assert modes[-1].frequency_hz + spacing > 0.97 * model.plane_wave_limit_hz


def test_f_max_limits_the_search(demo):
    rig, modes = demo
    some = find_modes(rig.model, 300.0)
    assert all(m.frequency_hz < 300.0 for m in some)
    assert [m.frequency_hz for m in some] == pytest.approx(
        [m.frequency_hz for m in modes if m.frequency_hz < 300.0])


def test_hole_resistance_lowers_q(air_20c):
    # DEVELOPERS.md Methods §3: holes and flames dissipate, so a hole resistance must lower every Q
    geom = uniform_tube()
    lossy = dataclasses.replace(geom, hole_resistance_pa_s_m3=3e6)
    q0 = {m.n: m.q for m in find_modes(TubeModel(geom, air_20c), 600.0)}
    q1 = {m.n: m.q for m in find_modes(TubeModel(lossy, air_20c), 600.0)}
    both = [n for n in q0 if n in q1 and q0[n] is not None and q1[n] is not None]
    assert len(both) >= 5
    assert all(q1[n] < q0[n] for n in both)


def test_q_is_half_power_bandwidth(demo):
    # DEVELOPERS.md Methods §8-9: Q = f_n / half-power bandwidth of |Z_in|^2
    rig, modes = demo
    for m in modes[2:6]:
        f = m.frequency_hz
        lo, hi = f - m.bandwidth_hz / 2, f + m.bandwidth_hz / 2
        power = np.abs(rig.model.response([lo, f, hi]).input_impedance) ** 2
        assert power[0] / power[1] == pytest.approx(0.5, abs=0.05)
        assert power[2] / power[1] == pytest.approx(0.5, abs=0.05)


def test_mode_notes(demo):
    _, modes = demo
    for m in modes:
        assert (m.note, m.cents) == nearest_note(m.frequency_hz)
        assert -50.0 <= m.cents <= 50.0
