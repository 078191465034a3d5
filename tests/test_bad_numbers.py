"""Issue 11: no bad number becomes a level.  NaN, +-inf, 0, negative and huge values
go into every numeric field of a rig, a sheet, a lock and the command-line options,
through the command line in-process (``showkit.cli.main.main``).

The property: a value outside the limits the README documents ("Safety limits",
the rig file table) is refused -- exit status 2, one line on stderr, no traceback --
and never gives exit 0 with a number derived from it; a value inside them may
succeed, and then every level it prints is finite.  The limits are written out here
from the README, not imported, so the code and the documentation are checked
against each other.
"""

from __future__ import annotations

import json
import math
import shutil
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf
from hypothesis import HealthCheck, given, settings, strategies as st

from showkit.cli.main import main

DEMO_RIG = Path(__file__).resolve().parent.parent / "showkit" / "data" / "demo_rig.toml"

#: the values a presenter can type or a damaged file can hold
SPECIAL = [math.nan, math.inf, -math.inf, 0.0, -0.0, -1.0, -20.0, 1e300, -1e300, 1e-300, 3000.0, 9000.0]
values = st.one_of(st.sampled_from(SPECIAL), st.floats(allow_nan=True, allow_infinity=True))

SETTINGS = dict(deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture,
                                                       HealthCheck.too_slow])


def _run(capsys, argv):
    """main(argv) in-process: (status, stdout, stderr); a traceback fails the test here."""
    status = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    assert "Traceback" not in out + err
    return status, out, err


def _refused(status, err):
    assert status == 2, err
    lines = [ln for ln in err.splitlines() if ln.startswith("showkit: ")]
    assert len(lines) == 1, err
    assert lines[0].isprintable()


def _in(value, low, high):
    return math.isfinite(value) and low <= value <= high


# ---------------------------------------------------------------- fixtures
@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    return tmp_path_factory.mktemp("bad_numbers")


@pytest.fixture(scope="module")
def track(folder):
    t = np.arange(int(0.5 * 48000)) / 48000
    x = 0.5 * np.sin(2 * np.pi * 150.0 * t) * np.hanning(t.size)
    path = folder / "tone.wav"
    sf.write(path, x.astype(np.float32), 48000, subtype="FLOAT")
    return path


SHEET = '''title = "bad numbers"
rig = "demo"
format = 1

[[cue]]
id = "t"
tone = { mode = 3, duration = 1.0 }
gain = -40
fade_in = 0.2
fade_out = 0.2

[[cue]]
id = "p"
pause = { duration = 1.0 }
'''


@pytest.fixture(scope="module")
def locked_sheet(folder):
    path = folder / "locked.toml"
    path.write_text(SHEET)
    assert main(["lock", str(path)]) == 0
    return path.read_text()


# ---------------------------------------------------------------- the rig file
#: field -> (section, key, how to write the value, the README's limits for a plain number)
RIG_FIELDS = {
    "length": ("tube", "length", "{}", (0.2, 20.0)),
    "bore": ("tube", "bore", "{}", (0.01, 0.5)),
    "wall": ("tube", "wall", "{}", (1e-4, 0.02)),
    "spacing": ("holes", "spacing", "{}", (1e-9, 20.0)),
    "first": ("holes", "first", "{}", (0.0, 20.0)),
    "diameter": ("holes", "diameter", "{}", (2e-4, 0.01)),
    "end_correction": ("holes", "end_correction", "{}", (0.0, 5.0)),
    "resistance": ("holes", "resistance", "{}", (0.0, 5e9)),
    "air_fraction": ("gas", "air_fraction", "{}", (0.0, 0.5)),
    "temperature": ("gas", "temperature", "{}", (233.15, 373.15)),
    "static_pressure": ("gas", "static_pressure", "{}", (1.0, 500.0)),
    "ambient": ("gas", "ambient", "{}", (5e4, 1.2e5)),
    "reference_frequency": ("drive", "reference_frequency", "{}", (10.0, 5000.0)),
    "reference_level": ("drive", "reference_level", "{}", (-80.0, 0.0)),
    "reference_pressure": ("drive", "reference_pressure", "{}", (0.01, 2000.0)),
    "reference_temperature": ("drive", "reference_temperature", "{}", (233.15, 373.15)),
    "speaker_resonance": ("drive", "speaker_resonance", "{}", (5.0, 1000.0)),
    "speaker_q": ("drive", "speaker_q", "{}", (0.1, 10.0)),
    "response_db": ("drive", "response_db", "[{}, 0.0]", (-60.0, 60.0)),
    "response_frequencies": ("drive", "response_frequencies", "[{}, 2000.0]", (1.0, 24000.0)),
    "reserve": ("safety", "reserve", "{}", (0.0, 0.9)),
}


def _toml_float(value: float) -> str:
    text = repr(float(value))
    return {"nan": "nan", "inf": "inf", "-inf": "-inf"}.get(text, text)


def _rig_with(section: str, key: str, text: str) -> str:
    """The demo rig with one field set (added to its section when the demo leaves it out)."""
    import tomlkit

    doc = tomlkit.parse(DEMO_RIG.read_text())
    doc.setdefault(section, tomlkit.table())
    if key == "response_db":
        doc["drive"]["response_frequencies"] = tomlkit.item([50.0, 2000.0])
    if key == "response_frequencies":
        doc["drive"]["response_db"] = tomlkit.item([0.0, 0.0])
    doc[section][key] = tomlkit.parse(f"x = {text}")["x"]
    return tomlkit.dumps(doc)


@settings(max_examples=80, **SETTINGS)
@given(field=st.sampled_from(sorted(RIG_FIELDS)), value=values)
def test_every_numeric_rig_field(field, value, track, folder, capsys):
    section, key, form, (low, high) = RIG_FIELDS[field]
    rig = folder / "rig.toml"
    rig.write_text(_rig_with(section, key, form.format(_toml_float(value))))
    status, out, err = _run(capsys, ["ceiling", track, "--rig", rig, "--json"])
    if not _in(value, low, high):
        _refused(status, err)  # outside the documented limits: never a ceiling
    elif status == 0:
        data = json.loads(out)
        assert math.isfinite(data["ceiling_db"]) and data["ceiling_db"] <= 60.0
        assert math.isfinite(data["static_pressure_pa"]) and data["static_pressure_pa"] > 0
    else:
        _refused(status, err)  # inside the limits but inconsistent (e.g. holes past the cap)


@settings(max_examples=30, **SETTINGS)
@given(value=st.one_of(st.sampled_from([-1, 0, 2001, 5000, 10**9, 2**63]), st.integers()))
def test_hole_count(value, track, folder, capsys):
    rig = folder / "rig_count.toml"
    rig.write_text(_rig_with("holes", "count", str(value)))
    status, out, err = _run(capsys, ["ceiling", track, "--rig", rig, "--json"])
    if not 0 <= value <= 2000:
        _refused(status, err)
    elif status == 0:
        assert math.isfinite(json.loads(out)["ceiling_db"])


# ---------------------------------------------------------------- options
#: (argv before the value, option, limits or None when no value may pass)
def _option_cases(track, sheet):
    return {
        "ceiling --static": (["ceiling", track, "--json", "--static"], (1.0, 500.0)),
        "ceiling --reserve": (["ceiling", track, "--json", "--reserve"], (0.0, 0.9)),
        "check --static": (["check", sheet, "--json", "--static"], (1.0, 500.0)),
        "check --reserve": (["check", sheet, "--json", "--reserve"], (0.0, 0.9)),
        "render --static": (["render", sheet, "--per-cue", sheet.parent / "out", "--static"], (1.0, 500.0)),
        "measure level --pressure": (["measure", "level", "--json", "--pressure"], (0.01, 2000.0)),
        "measure level --level": (["measure", "level", "--out", sheet.parent / "ref.wav", "--level"],
                                  (-80.0, 0.0)),
        "measure level --frequency": (["measure", "level", "--out", sheet.parent / "ref.wav", "--frequency"],
                                      (10.0, 1030.0)),  # and below the demo tube's plane-wave limit
        "modes --max-frequency": (["modes", "--json", "--max-frequency"], (5e-324, 1.8e308)),
        "measure sweep --level": (["measure", "sweep", "--out", sheet.parent / "sw.wav", "--length", "1",
                                   "--level"], (-80.0, -1.0)),
    }


OPTIONS = ["ceiling --static", "ceiling --reserve", "check --static", "check --reserve", "render --static",
           "measure level --pressure", "measure level --level", "measure level --frequency",
           "measure sweep --level", "modes --max-frequency"]


@settings(max_examples=80, **SETTINGS)
@given(option=st.sampled_from(OPTIONS), value=values)
def test_every_numeric_option(option, value, track, folder, locked_sheet, capsys):
    sheet = folder / "opt.toml"
    sheet.write_text(locked_sheet)
    argv, (low, high) = _option_cases(track, sheet)[option]
    text = _toml_float(value)
    # --opt=VALUE: a negative number after a space would be read as an option by argparse
    status, out, err = _run(capsys, argv[:-1] + [f"{argv[-1]}={text}"])
    if not _in(value, low, high):
        _refused(status, err)
        return
    assert status in (0, 2), err
    if status == 0 and "--json" in argv:
        for number in _numbers(json.loads(out)):
            assert math.isfinite(number)


def _numbers(value):
    if isinstance(value, dict):
        for v in value.values():
            yield from _numbers(v)
    elif isinstance(value, list):
        for v in value:
            yield from _numbers(v)
    elif isinstance(value, float):
        yield value


@pytest.mark.parametrize("option,value", [("--static", "nan"), ("--static", "9000 Pa"), ("--static", "0"),
                                          ("--static", "-20"), ("--temperature", "nan"),
                                          ("--temperature", "24"), ("--temperature", "500 C")])
def test_run_refuses_bad_readings_before_anything_plays(option, value, folder, locked_sheet, capsys):
    sheet = folder / "run.toml"
    sheet.write_text(locked_sheet)
    status, out, err = _run(capsys, ["run", sheet, "--auto", "--log", folder / "run.jsonl", f"{option}={value}"])
    _refused(status, err)
    assert option in err


def test_the_static_door_is_the_same_for_the_rig_file_and_the_options(folder, track, capsys):
    """check --static "9000 Pa" was accepted (+53 dB on every ceiling) while the rig refused it."""
    rig = folder / "rig9000.toml"
    rig.write_text(_rig_with("gas", "static_pressure", '"9000 Pa"'))
    s1, _, e1 = _run(capsys, ["ceiling", track, "--rig", rig])
    s2, _, e2 = _run(capsys, ["ceiling", track, "--static", "9000 Pa"])
    _refused(s1, e1)
    _refused(s2, e2)
    assert "outside 1 to 500 Pa" in e1 and "outside 1 to 500 Pa" in e2


# ---------------------------------------------------------------- the sheet
SHEET_FIELDS = {
    # field -> (text to replace in SHEET, replacement with {}, value allowed?)
    "gain": ("gain = -40", "gain = {}", lambda v: math.isfinite(v) and v <= -27.0),
    "fade_in": ("fade_in = 0.2", "fade_in = {}", lambda v: math.isfinite(v) and 0 <= v <= 0.8),
    "fade_out": ("fade_out = 0.2", "fade_out = {}", lambda v: math.isfinite(v) and 0 <= v <= 0.8),
    "tone.mode": ("mode = 3", "frequency = {}", lambda v: math.isfinite(v) and 0 < v < 1000.0),
}


@settings(max_examples=40, **SETTINGS)
@given(field=st.sampled_from(sorted(SHEET_FIELDS)), value=values)
def test_every_numeric_sheet_field(field, value, folder, capsys):
    old, new, allowed = SHEET_FIELDS[field]
    sheet = folder / "sheet.toml"
    sheet.write_text(SHEET.replace(old, new.format(_toml_float(value))))
    status, out, err = _run(capsys, ["check", sheet, "--json"])
    # never `ok` from a bad number: refused, or the check says the cue is not ok
    if status == 0:
        assert allowed(value)
        for number in _numbers(json.loads(out)):
            assert math.isfinite(number) or number is None
    else:
        assert status == 2


# ---------------------------------------------------------------- the lock
LOCK_FIELDS = ["static_pa", "reserve", "ceiling_db", "pressure_db", "full_scale_db", "frequency_hz"]


@settings(max_examples=60, **SETTINGS)
@given(field=st.sampled_from(LOCK_FIELDS), value=values)
def test_every_numeric_lock_field(field, value, folder, locked_sheet, capsys):
    import tomlkit

    doc = tomlkit.parse(locked_sheet)
    lock = doc["cue"][0]["lock"]
    original = float(lock[field])
    lock[field] = tomlkit.parse(f"x = {_toml_float(value)}")["x"]
    sheet = folder / "lock.toml"
    sheet.write_text(tomlkit.dumps(doc))
    status, out, err = _run(capsys, ["check", sheet, "--json"])
    if value == original or (field == "frequency_hz" and math.isfinite(value) and value > 0):
        return  # not a damaged lock (frequency_hz is a record of the tone, not a level)
    if (field == "static_pa" and _in(value, 1.0, 500.0)) or (field == "reserve" and _in(value, 0.0, 0.9)):
        # within the limits a lock's static pressure or reserve is indistinguishable from a
        # lock made at that reading; today's ceiling rescales from it exactly
        return
    if field == "full_scale_db" and value >= float(lock["pressure_db"]):
        return  # the pressure limit still sets the same ceiling (render checks the peak itself)
    # any other change: the cue is not ok (stale with a reason, or over), exit 2, no traceback
    assert status == 2, out + err
    if out.strip():
        cue = json.loads(out)["cues"][0]
        assert cue["status"] in ("stale", "over")
        assert cue["message"]


@pytest.mark.parametrize("field,value", [("static_pa", "nan"), ("static_pa", "0.0"), ("static_pa", "-20.0"),
                                         ("pressure_db", "nan"), ("reserve", "1.0")])
def test_the_lock_cases_of_the_issue_are_stale_with_a_reason(field, value, folder, locked_sheet, capsys):
    """static_pa = nan made `check` say ok for a cue 27 dB over; 0, -20 or reserve = 1 a traceback."""
    import tomlkit

    doc = tomlkit.parse(locked_sheet)
    doc["cue"][0]["lock"][field] = tomlkit.parse(f"x = {value}")["x"]
    sheet = folder / "lock_issue.toml"
    sheet.write_text(tomlkit.dumps(doc))
    status, out, err = _run(capsys, ["check", sheet, "--json"])
    assert status == 2
    cue = json.loads(out)["cues"][0]
    assert cue["status"] == "stale" and "lock" in cue["message"]
    # and render refuses it
    status, out, err = _run(capsys, ["render", sheet, "--per-cue", folder / "lock_out"])
    _refused(status, err)
    assert not (folder / "lock_out").exists() or not any((folder / "lock_out").iterdir())
    shutil.rmtree(folder / "lock_out", ignore_errors=True)


def test_reference_level_nan_no_longer_renders_a_tone_at_full_scale(folder, capsys):
    """The issue's chain: reference_level = nan -> ceiling at full scale (+4.75 dB where the sane
    rig gives -21.27), lock, render --per-cue at 0 dBFS.  Now the rig is refused at the first step."""
    rig = folder / "nanrig.toml"
    rig.write_text(_rig_with("drive", "reference_level", "nan"))
    sheet = folder / "nan.toml"
    sheet.write_text(SHEET.replace('rig = "demo"', f'rig = "{rig}"').replace("gain = -40", "gain = 0"))
    status, out, err = _run(capsys, ["lock", sheet])
    _refused(status, err)
    assert "reference_level" in err and "finite" in err
    status, out, err = _run(capsys, ["render", sheet, "--per-cue", folder / "nan_out"])
    _refused(status, err)


def test_measure_level_never_writes_a_bad_number_into_the_rig(folder, capsys):
    """--level nan --update-rig wrote reference_level = nan into the rig, exit 0."""
    rig = folder / "mine.toml"
    rig.write_text(DEMO_RIG.read_text())
    before = rig.read_text()
    for argv in (["--pressure", "5 Pa", "--level", "nan"], ["--pressure", "nan"], ["--pressure", "0 Pa"],
                 ["--pressure", "5 Pa", "--frequency", "-100"], ["--pressure", "inf Pa"]):
        status, out, err = _run(capsys, ["measure", "level", "--rig", rig, "--update-rig", "--temperature", "20 C",
                                         *argv])
        _refused(status, err)
        assert rig.read_text() == before
    status, out, err = _run(capsys, ["measure", "level", "--out", folder / "nan.wav", "--level", "nan"])
    _refused(status, err)
    assert not (folder / "nan.wav").exists()


@pytest.mark.parametrize("value,says", [("1e14", "outside 10 to 5000 Hz"), ("inf", "not a finite"),
                                        ("5", "outside 10 to 5000 Hz"), ("2000", "plane-wave limit")])
def test_a_calibration_frequency_is_refused_for_what_it_is_before_the_model_runs(value, says, folder, capsys):
    """measure level --frequency 1e14 (or inf) went into the loss family's response first: it overflowed
    (warnings on the terminal) and was refused as "changes by nan dB" near some mode.  The calibration
    door's checks now come first, with their own words, and no model is evaluated out of range."""
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("error", RuntimeWarning)
        status, out, err = _run(capsys, ["measure", "level", "--out", folder / "refused.wav",
                                         f"--frequency={value}"])
    _refused(status, err)
    assert says in err and "nan" not in err
    assert not (folder / "refused.wav").exists()
