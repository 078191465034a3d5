"""The two doors (issue 11 item 1): today's conditions and the calibration, one set of limits each.

Limits as the README's "Safety limits" table states them; unit conversions as
``showkit.units`` documents (1 inH2O = 249.0889 Pa conventional, NIST SP 811; 1 mbar = 100 Pa).
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given, strategies as st

from showkit.conditions import Conditions, make_calibration, make_conditions
from showkit.errors import InputError
from showkit.physics.drive import DriveCalibration
from showkit.rigfile import load_rig

BASE = Conditions(20.0, 293.15, 0.25)


def test_text_and_numbers_in_si():
    c = make_conditions("0.09 inH2O", "24 C", "0.3")
    assert c.static_pa == pytest.approx(0.09 * 249.0889, rel=1e-5)
    assert c.temperature_k == pytest.approx(297.15)
    assert c.reserve == 0.3
    assert make_conditions("0.2 mbar", None, None, base=BASE).static_pa == pytest.approx(20.0)
    assert make_conditions(None, None, None, base=BASE) == BASE


@pytest.mark.parametrize("static,temperature,reserve,where,words", [
    ("9000 Pa", None, None, "--static", ["outside 1 to 500 Pa", "unit"]),
    ("nan", None, None, "--static", ["finite"]),
    ("0", None, None, "--static", ["outside"]),
    ("-20 Pa", None, None, "--static", ["outside"]),
    (None, "24", None, "--temperature", ["-40 to 100 C", "kelvin"]),
    (None, "500 C", None, "--temperature", ["-40 to 100 C"]),
    (None, "-300 C", None, "--temperature", ["-40 to 100 C"]),
    (None, None, "1", "--reserve", ["0 to 0.9"]),
    (None, None, "nan", "--reserve", ["finite"]),
])
def test_one_line_naming_the_option_and_the_limit(static, temperature, reserve, where, words):
    with pytest.raises(InputError) as info:
        make_conditions(static, temperature, reserve, base=BASE,
                        where={"static": "--static", "temperature": "--temperature", "reserve": "--reserve"})
    line = info.value.line()
    assert line.startswith(where + ":") and "\n" not in line
    for w in words:
        assert w in line, line


@given(st.floats(allow_nan=True, allow_infinity=True), st.floats(allow_nan=True, allow_infinity=True),
       st.floats(allow_nan=True, allow_infinity=True))
def test_whatever_comes_out_is_within_the_limits(static, temperature, reserve):
    try:
        c = make_conditions(static, temperature, reserve)
    except InputError:
        return
    assert 1.0 <= c.static_pa <= 500.0 and 233.15 <= c.temperature_k <= 373.15 and 0.0 <= c.reserve <= 0.9


def test_rig_with_conditions_goes_through_the_door():
    rig = load_rig()
    with pytest.raises(InputError, match="outside 1 to 500 Pa"):
        rig.with_conditions(static_pa=9000.0)
    with pytest.raises(InputError):
        rig.with_conditions(reserve=math.nan)
    assert rig.with_conditions(static_pa="22 Pa").static_pa == 22.0
    assert rig.with_conditions() is rig


def test_calibration_door():
    assert make_calibration() == DriveCalibration()
    d = make_calibration("120 Hz", -20, "6 Pa", "55 Hz", 0.7, [50, "100 Hz"], [0.0, -3.0])
    assert d.response_freq_hz == (50.0, 100.0) and d.response_db == (0.0, -3.0)
    with pytest.raises(InputError, match="above full scale"):
        make_calibration(reference_level=3)
    for kwargs in ({"reference_level": math.nan}, {"speaker_q": math.inf}, {"reference_pressure": "0 Pa"},
                   {"reference_frequency": -100}, {"response_frequencies": [-50, 0], "response_db": [0, 0]},
                   {"response_frequencies": [100, 50], "response_db": [0, 0]},
                   {"response_frequencies": [50], "response_db": [0]}):
        with pytest.raises(InputError):
            make_calibration(**kwargs)
    rig = load_rig()
    with pytest.raises(InputError, match="plane-wave limit"):
        make_calibration(reference_frequency=3000, tube=rig.model, where={"reference_frequency": "--frequency"})


@pytest.mark.parametrize("text,kelvin", [("-40 C", 233.15), ("-40 F", 233.15), ("100 C", 373.15)])
def test_the_temperature_limits_themselves_are_accepted(text, kelvin):
    """"-40 C" converts to 233.14999999999998 K and was refused as "-40.0 C is outside -40 to
    100 C" (a review's report): the limits are in, and the value is put on the limit."""
    assert make_conditions("20 Pa", text, 0.25).temperature_k == kelvin
