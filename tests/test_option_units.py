"""Frequencies on the command line take their units, and four refusals say what they mean.

Found by a new user's trial of ``showkit measure`` (session 9's note): an error suggested
``"120 Hz"`` where ``--frequency`` took only a bare number; a sweep at ``--level -200`` was
written silent; the rig file's refusal and ``measure level`` named different frequencies to
calibrate at; a refusal printed "changes by 0.1 dB (limit 0.1 dB)"; a temperature below
absolute zero was reported as "-inf".
"""

from __future__ import annotations

import re

import numpy as np
import pytest
import soundfile as sf

from showkit.cli.main import main
from showkit.rigfile import demo_rig_path


def _run(capsys, argv):
    status = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return status, out, err


def _one_line(status, err) -> str:
    assert status == 2, err
    lines = [ln for ln in err.splitlines() if ln.startswith("showkit: ")]
    assert len(lines) == 1, err
    return lines[0]


def _rig_with(tmp_path, old: str, new: str):
    text = demo_rig_path().read_text()
    assert old in text
    path = tmp_path / "rig.toml"
    path.write_text(text.replace(old, new))
    return path


@pytest.mark.parametrize("with_unit,bare", [("120 Hz", "120"), ("0.12 kHz", "120")])
def test_measure_level_frequency_takes_its_unit(with_unit, bare, capsys):
    # 120 Hz is on the demo tube's mode 2: refused the same way, with or without the unit
    line_unit = _one_line(*_run(capsys, ["measure", "level", "--pressure", "0.3 Pa", "--frequency", with_unit])[::2])
    line_bare = _one_line(*_run(capsys, ["measure", "level", "--pressure", "0.3 Pa", "--frequency", bare])[::2])
    assert line_unit == line_bare
    assert "near mode 2" in line_unit


def test_sweep_start_and_stop_take_their_units(tmp_path, capsys):
    a, b = tmp_path / "a.wav", tmp_path / "b.wav"
    status, out, err = _run(capsys, ["measure", "sweep", "--out", a, "--length", "2",
                                     "--start", "30 Hz", "--stop", "1.5 kHz"])
    assert status == 0, err
    assert "30-1500 Hz" in out
    assert _run(capsys, ["measure", "sweep", "--out", b, "--length", "2", "--start", "30", "--stop", "1500"])[0] == 0
    np.testing.assert_array_equal(sf.read(a)[0], sf.read(b)[0])


def test_modes_max_frequency_takes_its_unit(capsys):
    status, out_unit, _ = _run(capsys, ["modes", "--json", "--max-frequency", "0.3 kHz"])
    assert status == 0
    assert _run(capsys, ["modes", "--json", "--max-frequency", "300"])[1] == out_unit
    line = _one_line(*_run(capsys, ["modes", "--max-frequency", "300 furlongs"])[::2])
    assert "--max-frequency" in line


@pytest.mark.parametrize("level", ["-200", "-80.5"])
def test_a_sweep_too_quiet_to_measure_is_refused_and_not_written(level, tmp_path, capsys):
    out = tmp_path / "quiet.wav"
    line = _one_line(*_run(capsys, ["measure", "sweep", "--out", out, "--length", "2", f"--level={level}"])[::2])
    assert "--level" in line and "-80 dBFS" in line
    assert not out.exists()


def test_the_quietest_sweep_allowed_is_written_at_its_level(tmp_path, capsys):
    out = tmp_path / "quiet.wav"
    status, _, err = _run(capsys, ["measure", "sweep", "--out", out, "--length", "2", "--level=-80"])
    assert status == 0, err
    x, _ = sf.read(out)
    assert 20 * np.log10(np.max(np.abs(x))) == pytest.approx(-80.0, abs=0.01)


@pytest.mark.parametrize("gas", [
    {},  # read in the rig file's gas
    # read at 10 C on a day at 35 C: the refusal is made, and its frequency named, in the reading's gas
    {'temperature = "20 C"': 'temperature = "35 C"',
     'reference_pressure = "0.27 Pa"': 'reference_pressure = "0.27 Pa"\nreference_temperature = "10 C"'}])
def test_the_rig_files_refusal_and_measure_level_name_the_same_frequency(gas, tmp_path, capsys):
    text = demo_rig_path().read_text()
    for old, new in {'reference_frequency = "1439.3 Hz"': 'reference_frequency = "120 Hz"', **gas}.items():
        assert old in text
        text = text.replace(old, new)
    rig = tmp_path / "rig.toml"
    rig.write_text(text)
    load_line = _one_line(*_run(capsys, ["modes", "--rig", rig])[::2])
    named, gas_c = re.search(r"calibrate again at ([0-9.]+) Hz for a reading in gas at ([0-9.-]+) C",
                             load_line).groups()
    assert float(gas_c) == (10.0 if gas else 20.0)
    status, out, err = _run(capsys, ["measure", "level", "--rig", rig, "--pressure", "0.3 Pa",
                                     "--temperature", f"{gas_c} C"])
    line = _one_line(status, err)
    assert f"play the sine at {named} Hz" in line
    assert f"calibrating at {named} Hz" in err
    # and that frequency is taken in that gas
    status, _, err = _run(capsys, ["measure", "level", "--rig", rig, "--out", tmp_path / "s.wav",
                                   "--temperature", f"{gas_c} C", "--frequency", f"{named} Hz"])
    assert status == 0, err


def test_a_spread_just_over_the_limit_does_not_read_as_the_limit():
    from showkit.physics.family import REFERENCE_LIMIT_DB, ReferenceCheck

    for spread, shown in ((0.1001, "0.1001"), (0.104, "0.104"), (0.13, "0.13"), (5.873, "5.87"), (12.5, "12.50")):
        text = ReferenceCheck(767.1, spread, False, 3, 156.3).message()
        assert f"changes by {shown} dB" in text, text
    assert REFERENCE_LIMIT_DB == 0.1  # the cases above are written for this limit


def test_no_calibration_frequency_above_the_calibration_limit_is_suggested(tmp_path, capsys):
    """A 10-mm bore's plane-wave limit is far above 5 kHz, the calibration door's limit: a refused
    reference was answered with 11972.5 Hz, which `measure level` then refused (a review)."""
    from showkit.conditions import REFERENCE_FREQUENCY_MAX_HZ
    from showkit.physics.family import check_reference
    from showkit.rigfile import load_rig

    rig = load_rig(None).with_conditions(temperature_k=293.15)
    assert check_reference(rig.loss_family, 120.0, 900.0).suggestion_hz <= 900.0
    small = _rig_with(tmp_path, 'bore = "80 mm"', 'bore = "10 mm"')
    line = _one_line(*_run(capsys, ["modes", "--rig", small])[::2])
    for hz in re.findall(r"at ([0-9.]+) Hz for a reading", line):
        assert float(hz) <= REFERENCE_FREQUENCY_MAX_HZ


def test_a_sweep_bound_below_the_floor_is_one_refusal_not_two_contradicting_ones(tmp_path, capsys):
    hot = _rig_with(tmp_path, 'reference_level = -20', 'reference_level = -60')
    hot.write_text(hot.read_text().replace('reference_pressure = "0.27 Pa"', 'reference_pressure = "2.7 Pa"'))
    out = tmp_path / "h.wav"
    line = _one_line(*_run(capsys, ["measure", "sweep", "--rig", hot, "--out", out])[::2])
    assert "below the -80 dBFS floor" in line and "leave --level out" not in line
    assert not out.exists()


@pytest.mark.parametrize("field_old,field_new,where", [
    ('temperature = "20 C"', 'temperature = "-300 C"', "gas.temperature"),
    ('reference_pressure = "0.27 Pa"', 'reference_pressure = "0.27 Pa"\nreference_temperature = "-500 F"',
     "drive.reference_temperature")])
def test_a_temperature_below_absolute_zero_says_so(field_old, field_new, where, tmp_path, capsys):
    rig = _rig_with(tmp_path, field_old, field_new)
    line = _one_line(*_run(capsys, ["modes", "--rig", rig])[::2])
    assert where in line and "absolute zero" in line
    assert "inf" not in line
