"""The safe-level rule and the drive ceiling (DEVELOPERS.md Methods §7)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from showkit.analysis.pressure import hole_filters, signal_report
from showkit.physics import ceiling as rule
from showkit.physics.response import pressure_signal, transfer
from showkit.rigfile import load_rig
from signal_support import faded_sine

DB2 = 20 * math.log10(2.0)
#: A tone near the demo rig's mode 2 for the hand checks.  The calibration used to sit here;
#: issue 13 moved it between high modes, where the tube's losses do not move the reading.
TONE_HZ = 120.0


@pytest.fixture(scope="module")
def rig():
    return load_rig(None)


@pytest.fixture(scope="module")
def filters(rig):
    return hole_filters(rig)


def _hand_ceiling_db(rig, freq_hz, amplitude):
    """By hand from the calibration point: cap pressure scales with the digital amplitude,
    the worst hole by |G_i| / |G_cap| at the tone's frequency (DEVELOPERS.md Methods §5 and §7)."""
    d = rig.drive
    cap_pa = d.reference_pressure_pa * amplitude / 10 ** (d.reference_level_dbfs / 20)
    g, cap = transfer(rig.model, d, [freq_hz])
    if freq_hz != d.reference_frequency_hz:
        cap_pa *= abs(cap[0]) / abs(transfer(rig.model, d, [d.reference_frequency_hz])[1][0])
    worst_pa = cap_pa * np.abs(g[:, 0]).max() / abs(cap[0])
    return 20 * math.log10((1 - rig.reserve) * rig.static_pa / worst_pa), int(np.argmax(np.abs(g[:, 0])))


def test_pressure_ceiling_formula():
    # g* = (1 - m) dP0 / P (DEVELOPERS.md Methods §7)
    assert rule.pressure_ceiling_db(15.0, 20.0, 0.25) == pytest.approx(0.0, abs=1e-12)
    assert rule.pressure_ceiling_db(0.0, 20.0, 0.25) == math.inf
    with pytest.raises(ValueError):
        rule.pressure_ceiling_db(1.0, 0.0, 0.25)
    with pytest.raises(ValueError):
        rule.pressure_ceiling_db(1.0, 20.0, 1.0)


def test_linearity_of_the_rule():
    base = rule.pressure_ceiling_db(3.7, 20.0, 0.25)
    assert rule.pressure_ceiling_db(3.7, 40.0, 0.25) - base == pytest.approx(DB2, abs=1e-12)
    assert rule.pressure_ceiling_db(3.7, 20.0, 0.4) - base == pytest.approx(
        20 * math.log10(0.6 / 0.75), abs=1e-12)
    assert rule.pressure_ceiling_db(7.4, 20.0, 0.25) - base == pytest.approx(-DB2, abs=1e-12)


def test_combine_and_rescale():
    c = rule.combine(-3.0, 10.0)
    assert (c.ceiling_db, c.limited_by) == (-3.0, "pressure")
    c = rule.combine(12.0, 10.0)
    assert (c.ceiling_db, c.limited_by) == (10.0, "full_scale")
    # silence: both limits infinite -> the full-scale cap, MAX_GAIN_DB
    c = rule.combine(math.inf, math.inf)
    assert (c.ceiling_db, c.limited_by) == (rule.MAX_GAIN_DB, "full_scale")
    assert rule.combine(80.0, 100.0).ceiling_db == rule.MAX_GAIN_DB
    r = rule.rescale(rule.combine(-3.0, 10.0), 20.0, 40.0, 0.25, 0.25)
    assert r.ceiling_db == pytest.approx(-3.0 + DB2, abs=1e-12)
    r = rule.rescale(rule.combine(-3.0, 10.0), 20.0, 200.0, 0.25, 0.25)
    assert (r.ceiling_db, r.limited_by) == (10.0, "full_scale")  # the full-scale limit stays


def test_sine_at_the_reference_frequency_against_the_hand_value(rig, filters):
    fs = filters.rate_hz
    amp = 0.01
    f = TONE_HZ
    # the hand value is the best-estimate model's: robust=False (the robust ceiling is checked in test_family.py)
    report = signal_report(rig, faded_sine(f, amp, 6.0, fs), fs, robust=False)
    hand, hole = _hand_ceiling_db(rig, f, amp)
    assert report.ceiling.limited_by == "pressure"
    assert report.ceiling_db == pytest.approx(hand, abs=0.1)
    assert report.worst_hole == hole
    assert report.min_pressure_pa == pytest.approx(rig.reserve * rig.static_pa, rel=1e-9)
    assert report.output_peak_dbfs == pytest.approx(20 * math.log10(amp) + report.ceiling_db, abs=1e-6)
    assert 0.0 < report.contrast < 0.11  # at the safe line, at most about 10 % (DEVELOPERS.md Methods §6)


def test_abrupt_start_raises_the_transient(rig, filters):
    # an abrupt start rings the tube's other modes: the ceiling is lower than the faded tone's
    fs = filters.rate_hz
    f = TONE_HZ
    t = np.arange(6 * fs) / fs
    abrupt = signal_report(rig, 0.01 * np.sin(2 * np.pi * f * t), fs, flames=False, robust=False)
    hand, _ = _hand_ceiling_db(rig, f, 0.01)
    assert abrupt.ceiling_db < hand - 0.1


def test_the_loudest_moment_governs(rig, filters):
    fs = filters.rate_hz
    f = TONE_HZ
    quiet = faded_sine(f, 0.002, 12.0, fs)
    loud = faded_sine(f, 0.02, 3.0, fs, fade_s=1.0)
    x = quiet.copy()
    x[int(5 * fs):int(8 * fs)] += loud
    report = signal_report(rig, x, fs, flames=False, robust=False)
    hand, _ = _hand_ceiling_db(rig, f, 0.022)
    assert report.ceiling_db == pytest.approx(hand, abs=0.15)
    assert 5.0 < report.worst_time_s < 8.0


def test_ceiling_scales_with_track_level_static_and_reserve(rig, filters):
    fs = filters.rate_hz
    rng = np.random.default_rng(2)
    x = 0.02 * rng.standard_normal(3 * fs)
    base = signal_report(rig, x, fs, flames=False)
    assert base.ceiling.limited_by == "pressure"
    louder = signal_report(rig, 2 * x, fs, flames=False)  # 6.02 dB louder
    assert louder.ceiling_db - base.ceiling_db == pytest.approx(-DB2, abs=1e-4)
    twice = signal_report(rig.with_conditions(static_pa=2 * rig.static_pa), x, fs, flames=False)
    assert twice.ceiling_db - base.ceiling_db == pytest.approx(DB2, abs=1e-9)
    res = signal_report(rig.with_conditions(reserve=0.4), x, fs, flames=False)
    assert res.ceiling_db - base.ceiling_db == pytest.approx(
        20 * math.log10((1 - 0.4) / (1 - rig.reserve)), abs=1e-9)
    # exact re-derivation without re-analysis
    again = rule.rescale(base.ceiling, rig.static_pa, 2 * rig.static_pa, rig.reserve, 0.4)
    assert again.ceiling_db == pytest.approx(
        signal_report(rig.with_conditions(static_pa=2 * rig.static_pa, reserve=0.4), x, fs,
                      flames=False).ceiling_db, abs=1e-9)


def test_silence_gets_the_full_scale_cap(rig):
    report = signal_report(rig, np.zeros(4800), 4800)
    assert report.ceiling.limited_by == "full_scale"
    assert report.ceiling_db == rule.MAX_GAIN_DB
    assert report.min_pressure_pa == rig.static_pa
    assert report.contrast == 0.0


def test_dc_offset_is_ignored_by_the_tube_but_not_by_full_scale(rig, filters):
    fs = filters.rate_hz
    f = TONE_HZ
    x = faded_sine(f, 0.01, 5.0, fs)
    plain = signal_report(rig, x, fs, flames=False, robust=False)
    # a steady offset, faded in and out over 2 s (a step would be a real transient)
    dc = 0.3 * _ramp(x.size, 2 * fs)
    offset = signal_report(rig, x + dc, fs, flames=False, robust=False)
    # the drive model is a band-pass: no DC response (the README's drive model).  Issue 13: with the
    # gas flowing the holes are resistive, so the tube no longer falls as f^2 below the modes and
    # the 2 s fades themselves (content near 0.25 Hz, through the driver's f roll-off) move the
    # pressure a little: measured 0.65 dB on the best estimate (0.01 dB with still gas)
    assert abs(offset.ceiling.pressure_db - plain.ceiling.pressure_db) < 1.0
    assert offset.peak == pytest.approx(0.31, rel=1e-3)
    assert offset.ceiling.full_scale_db == pytest.approx(-20 * math.log10(offset.peak), abs=1e-9)
    # an offset that starts abruptly is a step: the model sees its transient
    step = signal_report(rig, x + 0.3, fs, flames=False)
    assert step.ceiling.pressure_db < plain.ceiling.pressure_db - 3.0


def _ramp(n, fade):
    """0 -> 1 -> 0 with raised-cosine ends of ``fade`` samples."""
    w = np.ones(n)
    r = 0.5 * (1 - np.cos(np.pi * np.arange(fade) / fade))
    w[:fade] = r
    w[-fade:] = r[::-1]
    return w


def test_full_scale_limits_a_loud_track(rig, filters):
    fs = filters.rate_hz
    x = faded_sine(700.0, 0.9, 2.0, fs)  # far from the calibration: little pressure per dBFS?
    report = signal_report(rig, 0.001 * x, fs, flames=False)
    # whichever limits, the output never exceeds 0 dBFS
    assert report.output_peak_dbfs <= 1e-9
    assert report.ceiling_db == pytest.approx(min(report.ceiling.pressure_db,
                                                  report.ceiling.full_scale_db, rule.MAX_GAIN_DB))


signals = st.tuples(st.integers(0, 2**32 - 1), st.floats(0.001, 0.5), st.sampled_from([0, 1, 2]))


@settings(max_examples=6, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(signals)
def test_at_the_ceiling_no_hole_dips_below_the_safe_line(rig, filters, case):
    """At the ceiling every hole stays at or above reserve x static; 1 dB above, some hole dips."""
    seed, amp, kind = case
    fs = filters.rate_hz
    rng = np.random.default_rng(seed)
    n = int(0.8 * fs)
    if kind == 0:  # white noise
        x = amp * rng.standard_normal(n)
    elif kind == 1:  # clicks
        x = np.zeros(n)
        x[rng.integers(0, n, 5)] = amp * rng.uniform(-1, 1, 5)
    else:  # a chord of random tones
        t = np.arange(n) / fs
        x = sum(amp / 3 * np.sin(2 * np.pi * rng.uniform(60, 1700) * t + rng.uniform(0, 6)) for _ in range(3))
    report = signal_report(rig, x, fs, flames=False, robust=False)  # the best estimate's filters below
    p = pressure_signal(filters, x).real
    safe = rig.reserve * rig.static_pa
    gain = 10 ** (report.ceiling_db / 20)
    assert (rig.static_pa + gain * p).min() >= safe - 1e-6 * rig.static_pa
    if report.ceiling.limited_by == "pressure":
        # the envelope bounds |p|, not only -p: for tones it is within 1 dB of the true dip;
        # for a lone click or a short noise burst the pulse can be lopsided (measured on the
        # demo rig: up to 2.2 dB; common practice, no source), so the margin there is 3 dB
        margin_db = 1.0 if kind == 2 else 3.0
        above = 10 ** ((report.ceiling_db + margin_db) / 20)
        assert (rig.static_pa + above * p).min() < safe
