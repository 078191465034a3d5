"""Issue 13: the bias-flow hole, the loss family, the robust ceiling and the calibration check.

The truth in these tests is an independent re-simulation (tests/family_support.py: scipy
Bessel functions, explicit chain matrices, direct FFT convolution of the whole signal, the
real pressure rather than an envelope).
"""

from __future__ import annotations

import math
import re

import family_support as ref
import numpy as np
import pytest
import scipy.special as sp

from showkit.analysis.pressure import family_filters, signal_report
from showkit.errors import RigError
from showkit.physics.biasflow import (
    _i1e,
    _k1e,
    hole_aperture_impedance,
    howe_factor,
    jet_velocity_m_s,
)
from showkit.physics.family import (
    MEMBER_TOLERANCE_DB,
    REFERENCE_LIMIT_DB,
    LossPoint,
    members,
    reference_spread_db,
    suggest_reference,
)
from showkit.physics.modes import find_modes
from showkit.physics.response import transfer
from showkit.rigfile import demo_rig_path, load_rig, parse_rig


@pytest.fixture(scope="module")
def rig():
    return load_rig(None)


@pytest.fixture(scope="module")
def rate(rig):
    return family_filters(rig)[0][1].rate_hz


# ------------------------------------------------------------------ the bias-flow hole

def test_bessel_approximations_match_scipy():
    # A&S 9.8.3-9.8.8 quote relative errors of a few 1e-7; scipy.special.i1e/k1e (Cephes) as reference
    x = np.geomspace(1e-4, 80.0, 2000)
    assert np.max(np.abs(_i1e(x) / sp.i1e(x) - 1)) < 1e-6
    assert np.max(np.abs(_k1e(x) / sp.k1e(x) - 1)) < 1e-6


def test_howe_factor_against_scipy_and_its_limits():
    st = np.geomspace(1e-3, 40.0, 400)
    # the same formula (Eldredge & Dowling 2003, eq. 2.2) with scipy's iv/kv; conj: exp(-i w t) -> exp(+j w t)
    assert np.max(np.abs(howe_factor(st) - np.conj(ref.howe(st)))) < 1e-6
    # St -> inf: the inviscid conductivity (gamma -> 1, delta -> 0); Howe 1979
    assert abs(howe_factor(1e4) - 1) < 2e-4  # delta falls as 1/St
    # St -> 0: delta ~ (pi/4) St and gamma = O(St^2): the hole is a pure resistance (Howe 1979)
    small = howe_factor(np.array([1e-3]))[0]
    assert small.imag == pytest.approx(np.pi / 4 * 1e-3, rel=1e-3) and small.real < 1e-5
    # delta > 0 for all St: the shed vorticity absorbs sound (Howe 1979)
    assert np.all(howe_factor(st).imag > 0)


def test_quasi_steady_limit_is_two_rho_u_over_s():
    # at low St Howe's thin-plate aperture (K_0 = 2a, i.e. l_ec = pi a / 2) is the resistance 2 rho U / S
    a, rho, u = 0.8e-3, 1.85, 4.6
    area = np.pi * a * a
    z = hole_aperture_impedance(np.array([2 * np.pi * 1.0]), rho, a, np.pi * a / 2, u)[0]
    assert z.real == pytest.approx(2 * rho * u / area, rel=1e-3)
    # no flow: exactly the mass of the end corrections
    w = np.array([600.0])
    assert hole_aperture_impedance(w, rho, a, 1e-3, 0.0)[0] == 1j * 600.0 * rho * 1e-3 / area


def test_jet_velocity_is_the_orifice_law():
    # u = sqrt(2 dp / rho) (Bernoulli, the orifice law): 20 Pa of propane at 1.865 kg/m3 -> 4.63 m/s
    assert jet_velocity_m_s(20.0, 1.865) == pytest.approx(math.sqrt(40.0 / 1.865), rel=1e-12)


def test_transfer_functions_match_the_independent_simulation(rig):
    fam = rig.loss_family
    f = np.geomspace(20.0, 1700.0, 300)
    for point in (LossPoint(0.0, 0.0), fam.best, LossPoint(1.3, 2e6)):
        mine = fam.model(point).response(f)
        holes, cap = ref.hole_transfer(f, rig.geometry, rig.gas, point.flow_m_s, point.resistance_pa_s_m3)
        assert np.max(np.abs(mine.hole_pressure / holes - 1)) < 1e-5
        assert np.max(np.abs(mine.cap_pressure / cap - 1)) < 1e-5


def test_flowing_gas_damps_and_shifts_the_low_modes(rig):
    still = find_modes(rig.loss_family.model(LossPoint(0.0, 0.0)), 700.0)
    flowing = find_modes(rig.model, 700.0)
    by_n = {m.n: m for m in still}
    # the breathing mode needs the holes' mass: gone with the gas flowing (resistive holes)
    assert still[0].n == 0 and flowing[0].n == 1
    for m in flowing:
        if m.n in by_n and 2 <= m.n <= 8:
            # Q drops (walls and radiation only: hundreds; issue 13 measured 64 at n = 3 for still gas)
            assert m.q < 0.5 * by_n[m.n].q
            # and the hole mass no longer pushes the mode up: it falls towards n c / 2L
            assert m.frequency_hz < by_n[m.n].frequency_hz
            assert m.frequency_hz > m.n * rig.gas.sound_speed_m_s / (2 * rig.geometry.length_m) * 0.99


def test_published_flame_tube_mode_shift():
    """Gardner, Gee & Dix, JASA 125, 1285-1292 (2009): the drilled holes push the low modes of an
    unlit, gas-free tube up above n c / 2L, most at n = 1, fading for high n (from memory: the
    shift of the first mode was of order tens of percent and the high modes sat on the plain-pipe
    line).  Still gas reproduces that pattern; the flowing-gas model removes most of it."""
    from showkit.physics.gas import gas_state
    from showkit.physics.geometry import TubeGeometry
    from showkit.physics.tube import TubeModel

    air = gas_state("air", 0.0, 293.15)
    holes = tuple(np.linspace(0.0, 2.0, 81)[1:-1])
    geo = TubeGeometry(2.0, 0.075, 0.002, holes, 0.0015)
    base = air.sound_speed_m_s / 4.0
    still = {m.n: m.frequency_hz for m in find_modes(TubeModel(geo, air), 500)}
    assert still[1] / base > 1.2 and abs(still[5] / (5 * base) - 1) < 0.05
    from dataclasses import replace
    flow = replace(geo, hole_flow_m_s=jet_velocity_m_s(20.0, air.density_kg_m3))
    flowing = {m.n: m.frequency_hz for m in find_modes(TubeModel(flow, air), 500)}
    assert flowing[1] / base < 1.1


# ------------------------------------------------------------------ the calibration point

def test_reference_spread_against_the_independent_simulation(rig):
    fam = rig.loss_family
    pts = fam.dense(33)
    for f_ref in (rig.drive.reference_frequency_hz, 120.0, 186.0):
        levels = [ref.cap_level_db(rig, f_ref, p.flow_m_s, p.resistance_pa_s_m3) for p in pts]
        assert reference_spread_db(fam, f_ref, 33) == pytest.approx(max(levels) - min(levels), abs=1e-4)
    # the demo rig's calibration sits where the losses do not move the reading
    assert reference_spread_db(fam, rig.drive.reference_frequency_hz) <= REFERENCE_LIMIT_DB


def _rig_at(reference_hz, pressure="0.27 Pa"):
    text = demo_rig_path().read_text()
    text = text.replace('reference_frequency = "1439.3 Hz"', f'reference_frequency = "{reference_hz} Hz"')
    return text.replace('reference_pressure = "0.27 Pa"', f'reference_pressure = "{pressure}"')


def test_a_calibration_on_a_resonance_is_refused_with_one_line(write_rig, capsys):
    from showkit.cli.main import main

    still = find_modes(load_rig().loss_family.model(LossPoint(0.0, 0.0)), 400.0)
    mode3 = next(m for m in still if m.n == 3)
    path = write_rig(_rig_at(round(mode3.frequency_hz, 1)), "on-mode-3.toml")
    with pytest.raises(RigError) as info:
        load_rig(path)
    line = info.value.line()
    assert "mode 3" in line and "reference_frequency" in line and "\n" not in line
    suggested = float(line.split("calibrate again at ")[1].split(" Hz")[0])
    assert reference_spread_db(load_rig().loss_family, suggested) <= REFERENCE_LIMIT_DB
    assert main(["modes", "--rig", str(path)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "mode 3" in err[0]
    # the frequency it suggests is accepted
    assert load_rig(write_rig(_rig_at(suggested), "moved.toml")).drive.reference_frequency_hz == suggested


def test_suggestions_are_accepted_everywhere_along_the_band(rig):
    fam = rig.loss_family
    for near in (80.0, 300.0, 900.0):
        f = suggest_reference(fam, near)
        assert f is not None and reference_spread_db(fam, f) <= REFERENCE_LIMIT_DB / 2


# ------------------------------------------------------------------ the members

def _excess_over_members_db(fam, f_ref, chosen):
    """The largest steady-state excess (every frequency, every hole) of a dense set over the members:
    17 evenly spaced points per branch and 13 more within its first percent (2**-18 .. 2**-6: the
    losses there are the tube's own plus a little, where each mode's peak moves and falls fastest),
    on 10000 frequencies (1.1 cents apart; the search's 4000 are 2.8 cents apart)."""
    f = np.geomspace(5.0, fam.base.plane_wave_limit_hz, 10000)

    def env(p):
        r = fam.model(p).response(np.concatenate([[f_ref], f]))
        return np.abs(r.hole_pressure[:, 1:]).max(axis=0) / abs(r.cap_pressure[0])

    near_start = np.geomspace(2.0 ** -18, 2.0 ** -6, 13)
    dense = fam.dense(17) + [a.mix(b, float(t)) for a, b in fam.branches for t in near_start]
    top_members = np.max([env(p) for p in chosen], axis=0)
    return max(float(np.max(20 * np.log10(env(p) / top_members))) for p in dict.fromkeys(dense))


#: The real-music test rig (tests/realmusic.py; invented): the demo tube 2405.5 mm long,
#: calibrated at 1367.1 Hz. A bisection of each branch from its ends chose members 0.23 dB
#: below a point 1/64 along (a ceiling 0.24 dB high in time).
def _long_rig():
    text = demo_rig_path().read_text()
    text = re.sub(r'(?m)^length = .*$', 'length = "2405.5 mm"', text, count=1)
    text = re.sub(r'(?m)^reference_frequency = .*$', 'reference_frequency = "1367.1 Hz"', text, count=1)
    return parse_rig(text, "long test rig")


@pytest.mark.slow
@pytest.mark.parametrize("which", ["demo", "long"])
def test_members_cover_a_dense_family_at_every_frequency(rig, which):
    """Steady state: no point of a dense set (evenly along each branch, and geometric near its
    still-gas end) answers more than twice the member tolerance above the members' largest, on a
    frequency grid four times the search's: the search meets its tolerance on its own grid, and a
    review found 0.039 dB between its points (a band 0.07 Hz wide at 162.9 Hz on the long rig; in
    time 0.011 dB)."""
    r = rig if which == "demo" else _long_rig()
    if which == "long":
        assert r.geometry.length_m == pytest.approx(2.4055)
    fam = r.loss_family
    chosen = members(fam, r.drive.reference_frequency_hz)
    assert fam.best == chosen[0]
    assert _excess_over_members_db(fam, r.drive.reference_frequency_hz, chosen) < 2 * MEMBER_TOLERANCE_DB


@pytest.mark.slow
def test_members_reach_the_dense_family_within_a_tenth_of_a_db(rig):
    """The min over the members is within 0.1 dB of the min over a set 4 times denser, in time
    for a glide, clicks and a chord sequence."""
    fam = rig.loss_family
    chosen = members(fam, rig.drive.reference_frequency_hz)
    rate = 4800
    sigs = _signals(rig, rate)
    spectra = {name: np.fft.rfft(sigs[name], GRID) for name in ("glide", "clicks", "music")}
    groups = {"members": chosen, "dense": fam.dense(9)}
    dips = {}  # the deepest dip of each signal through each point's transfer, each point once
    for p in dict.fromkeys([*groups["members"], *groups["dense"]]):
        g, _ = transfer(fam.model(p), rig.drive, np.fft.rfftfreq(GRID, 1 / rate))
        dips[p] = {name: float(-np.fft.irfft(spec[None, :] * g, GRID, axis=1).min())
                   for name, spec in spectra.items()}
    worst = {label: {name: max(max(dips[p][name] for p in pts), 0.0) for name in spectra}
             for label, pts in groups.items()}
    for name in spectra:
        assert 20 * np.log10(worst["dense"][name] / worst["members"][name]) < 0.1, name


# ------------------------------------------------------------------ signals

def _fade(x, rate, s=0.3):
    n = int(s * rate)
    w = 0.5 * (1 - np.cos(np.pi * np.arange(n) / n))
    x = x.copy()
    x[:n] *= w
    x[-n:] *= w[::-1]
    return x


def _signals(rig, rate):
    """Tones on and between modes (of the still and the flowing models), a glide, clicks and a
    music-like sequence of chords with attacks, at the analysis rate."""
    t = np.arange(int(3.0 * rate)) / rate
    still = [m.frequency_hz for m in find_modes(rig.loss_family.model(LossPoint(0.0, 0.0)), 700)]
    best = [m.frequency_hz for m in find_modes(rig.model, 700)]
    out = {}
    for n in (2, 5):
        out[f"on still mode {n}"] = _fade(0.05 * np.sin(2 * np.pi * still[n] * t), rate)
        out[f"on flowing mode {n}"] = _fade(0.05 * np.sin(2 * np.pi * best[n - 1] * t), rate)
        mid = 0.5 * (still[n] + still[n + 1])
        out[f"between modes {n} and {n + 1}"] = _fade(0.05 * np.sin(2 * np.pi * mid * t), rate)
    tg = np.arange(int(6.0 * rate)) / rate
    f0, f1 = 60.0, 500.0
    phase = 2 * np.pi * f0 * 6.0 / np.log(f1 / f0) * ((f1 / f0) ** (tg / 6.0) - 1)
    out["glide"] = _fade(0.05 * np.sin(phase), rate)
    clicks = np.zeros(int(2.0 * rate))
    pulse = np.hanning(int(0.003 * rate))
    for k, at in enumerate((0.2, 0.7, 1.1)):
        i = int(at * rate)
        clicks[i:i + pulse.size] += (-1) ** k * 0.3 * pulse
    out["clicks"] = clicks
    rng = np.random.default_rng(13)
    notes = 440 * 2 ** ((np.array([45, 48, 52, 50, 55, 53, 57, 60]) - 69) / 12)  # A2..C4
    music = np.zeros(int(4.0 * rate))
    seg = int(0.5 * rate)
    ts = np.arange(seg) / rate
    env = np.exp(-ts / 0.35) * (1 - np.exp(-ts / 0.01))
    for k in range(8):
        chord = sum(np.sin(2 * np.pi * notes[(k + j) % 8] * h * ts + rng.uniform(0, 6)) / h
                    for j in (0, 2) for h in (1, 2, 3))
        music[k * seg:(k + 1) * seg] += 0.02 * env * chord
    out["music"] = music
    return out


# ------------------------------------------------------------------ the guarantee

#: Issue 13's "real tube": still gas with an extra loss spread uniformly along the bore.
UNIFORM_Q = 30.0
#: FFT size of the truth runs at 4800 Hz: 13.7 s, room for the longest signal (6 s) and its
#: ring-down (the sharpest member rings down by 80 dB in under 3 s).
GRID = 1 << 16


def _truth_tubes(rig):
    """Tubes the truth is simulated for, ``{name: (flow, resistance, bore_q)}``: the ends and
    interior points of both branches of the family."""
    fam = rig.loss_family
    (a1, b1), (a2, b2) = fam.branches
    pts = {"still, no extra loss": a1, "flow 0.15": a1.mix(b1, 0.15), "flow 0.4": a1.mix(b1, 0.4),
           "best estimate": fam.best, "flow top": b1, "resistance 0.3": a2.mix(b2, 0.3),
           "resistance top": b2}
    # (issue 13's uniformly damped tube lies outside the family: see showkit.physics.family)
    return {k: (p.flow_m_s, p.resistance_pa_s_m3, None) for k, p in pts.items()}


def _truth_grids(rig, rate):
    return {name: ref.transfer_grid(rig, GRID, rate, *spec) for name, spec in _truth_tubes(rig).items()}


def test_issue_case_old_ceiling_was_up_to_9_dB_too_high():
    """Issue 13's finding, reproduced: the still-gas, loss-free model (the old default) calibrated
    on its own mode 3, and a real tube with extra uniform loss (Q 11 to 32) giving the same
    reading.  Tones on and between modes: the model's ceilings were up to about +9.5 dB above
    the truth.  (Steady state, independent simulation.)"""
    rig = parse_rig(_rig_at(186.0), check_calibration=False)
    still = find_modes(rig.loss_family.model(LossPoint(0.0, 0.0)), 700)
    freqs = [m.frequency_hz for m in still if 3 <= m.n <= 7]
    # the real tube's Q, from the half-power bandwidth of its cap response (independent simulation)
    qs = []
    for f0 in freqs:
        f = f0 * np.linspace(0.9, 1.1, 4001)
        _, cap = ref.hole_transfer(f, rig.geometry, rig.gas, bore_q=UNIFORM_Q)
        p2 = np.abs(cap) ** 2
        k = int(np.argmax(p2))
        below = p2 < p2[k] / 2  # the half-power points on either side of this peak
        lo = k - int(np.argmax(below[:k][::-1])) - 1
        hi = k + int(np.argmax(below[k:]))
        qs.append(f[k] / (f[hi] - f[lo]))
    assert 10 < min(qs) and max(qs) < 35, qs  # rings with Q of about 11 to 32, as in the issue
    freqs = [m.frequency_hz for m in still if 1 <= m.n <= 10]
    freqs += [0.5 * (a + b) for a, b in zip(freqs[:-1], freqs[1:])]
    model = ref.steady_ceiling_db(rig, freqs, 0.05, 0.0, 0.0)
    truth = ref.steady_ceiling_db(rig, freqs, 0.05, 0.0, 0.0, bore_q=UNIFORM_Q)
    assert np.max(model - truth) > 8.0, np.max(model - truth)


def test_issue_case_calibration_is_now_refused():
    with pytest.raises(RigError, match="mode 3"):
        parse_rig(_rig_at(186.0))


@pytest.mark.slow
def test_no_ceiling_above_the_truth_anywhere_in_the_family(rig, rate):
    """The guarantee: calibrated where showkit accepts, for every tube in the family (and the issue's
    uniformly damped one) the locked ceiling keeps every hole at or above the safe line, within
    0.1 dB, for tones on and between modes, a glide, clicks and music."""
    sigs = _signals(rig, rate)
    grids = _truth_grids(rig, rate)
    excess = []
    for name, x in sigs.items():
        tool = signal_report(rig, x, rate, flames=False).ceiling.pressure_db
        for tube, g in grids.items():
            excess.append((tool - ref.true_ceiling_db(rig, x, g, GRID), name, tube))
    worst = max(excess)
    assert worst[0] <= 0.1, worst


@pytest.mark.slow
def test_guarantee_at_a_second_accepted_calibration(rig):
    """The same at another frequency showkit accepts (mid-band), for tones and the glide."""
    f_ref = suggest_reference(rig.loss_family, 760.0)
    other = parse_rig(_rig_at(f_ref, "1 Pa"))
    rate = family_filters(other)[0][1].rate_hz
    sigs = {k: v for k, v in _signals(other, rate).items() if k.startswith(("on still", "between", "glide"))}
    grids = {k: v for k, v in _truth_grids(other, rate).items() if k != "resistance 0.3"}
    for name, x in sigs.items():
        tool = signal_report(other, x, rate, flames=False).ceiling.pressure_db
        for tube, g in grids.items():
            truth = ref.true_ceiling_db(other, x, g, GRID)
            assert tool <= truth + 0.1, (name, tube, tool - truth)


def test_robust_ceiling_is_the_lowest_member_and_flames_use_the_best_estimate(rig, rate):
    x = _signals(rig, rate)["on still mode 2"]
    robust = signal_report(rig, x, rate, flames=True)
    best = signal_report(rig, x, rate, flames=False, robust=False)
    assert robust.ceiling_db <= best.ceiling_db + 1e-9
    # on a still-gas mode the sharp member sets it, far below the best estimate's
    assert robust.set_by.startswith("still gas") and best.ceiling_db - robust.ceiling_db > 3.0
    assert "still gas" in robust.family_text and robust.frames.height is not None


def test_a_measurement_narrows_the_family():
    text = _rig_at(1439.3) + "\n[measured]\nflow_range = [0.8, 1.1]\nresistance_range = [0.0, 0.0]\n"
    rig = parse_rig(text, check_calibration=False)
    fam = rig.loss_family
    jet = jet_velocity_m_s(rig.static_pa, rig.gas.density_kg_m3)
    (a, b), = fam.branches
    # the fit's range, widened by sqrt 2 either way for half to twice the static pressure
    assert fam.measured and a.flow_m_s == pytest.approx(0.8 * jet / 2 ** 0.5)
    assert b.flow_m_s == pytest.approx(1.1 * jet * 2 ** 0.5)
    assert LossPoint(0.0, 0.0) not in members(fam, 1439.3)  # still gas is no longer a member
    # the narrower family accepts more calibration frequencies
    assert reference_spread_db(fam, 120.0) < reference_spread_db(load_rig().loss_family, 120.0)
    with pytest.raises(RigError, match="flow_range"):
        parse_rig(text.replace("[0.8, 1.1]", "[1.1, 0.8]"), check_calibration=False)
