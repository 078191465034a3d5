"""Unit conversions at the edges (showkit.units) against DEVELOPERS.md Methods §10."""

from __future__ import annotations

import math

import pytest
from hypothesis import given
from hypothesis import strategies as st

from showkit import units
from showkit.errors import InputError, ShowkitError

# --- pressures --------------------------------------------------------------------


@pytest.mark.parametrize("text, pa", [
    # conventional inch of water: 1000 kg/m3 x 9.80665 m/s2 x 0.0254 m = 249.08891 Pa (DEVELOPERS.md Methods §10)
    ("1 inH2O", 249.08891),
    ("0.1 inH2O", 24.908891),
    ("1 inWC", 249.08891),
    # mm of water 9.80665 Pa (DEVELOPERS.md Methods §10)
    ("1 mmH2O", 9.80665),
    ("2 mmWC", 19.6133),
    # 1 mbar = 100 Pa (SI definition of the bar, DEVELOPERS.md Methods §10)
    ("0.25 mbar", 25.0),
    ("1 hPa", 100.0),
    ("1 kPa", 1000.0),
    # 1 psi = 6894.757 Pa (NIST SP 811 appendix B, DEVELOPERS.md Methods §10)
    ("1 psi", 6894.757),
    ("25 Pa", 25.0),
    ("25Pa", 25.0),
    ("  25   pa ", 25.0),
])
def test_pressure_units(text, pa):
    assert units.pressure_pa(text) == pytest.approx(pa, rel=1e-6)


def test_inch_of_water_is_the_conventional_one():
    # DEVELOPERS.md Methods §10: conventional 249.089 Pa, not the 39.2 F value 249.082 Pa of NIST SP 811
    assert units.INCH_WATER_PA == pytest.approx(249.089, abs=5e-4)
    assert abs(units.INCH_WATER_PA - 249.082) > 5e-3


def test_plain_number_is_si():
    # common practice, no source: a bare number in a rig file is SI
    assert units.pressure_pa(20) == 20.0
    assert units.length_m(2) == 2.0
    assert units.frequency_hz(110.5) == 110.5
    assert units.temperature_k(293.15) == 293.15


# --- lengths ----------------------------------------------------------------------


@pytest.mark.parametrize("text, metres", [
    # international inch 0.0254 m and foot 0.3048 m, exact (1959 yard and pound agreement)
    ("1 in", 0.0254),
    ("1 ft", 0.3048),
    ("6 ft 6 in", 6 * 0.3048 + 6 * 0.0254),    # 1.9812 m
    ("6ft6in", 1.9812),
    ("6 feet 6 inches", 1.9812),
    ("6' 6\"", 1.9812),
    ("1 ft 0.5 in", 0.3048 + 0.0127),
    ("78 mm", 0.078),
    ("7.8 cm", 0.078),
    ("2.0 m", 2.0),
    ("2 metres", 2.0),
    ("1e-3 m", 0.001),
    # fractions of an inch, as drills and tube fittings are sized (a fresh user's "1/16 in")
    ("1/16 in", 0.0254 / 16),
    ("1 1/2 in", 1.5 * 0.0254),
    ("3 1/4\"", 3.25 * 0.0254),
    ("6 ft 1/2 in", 6 * 0.3048 + 0.0127),
])
def test_length_units(text, metres):
    assert units.length_m(text) == pytest.approx(metres, rel=1e-12)


@given(whole=st.integers(0, 12), top=st.integers(0, 64), bottom=st.integers(1, 64))
def test_fractions_of_an_inch(whole, top, bottom):
    text = f"{whole} {top}/{bottom} in"
    assert units.length_m(text) == pytest.approx((whole + top / bottom) * 0.0254, rel=1e-12, abs=1e-15)


@given(feet=st.integers(0, 20), inches=st.floats(0, 11.99, allow_nan=False))
def test_feet_and_inches_add(feet, inches):
    # exact definitions: 1 ft = 12 in = 0.3048 m (1959 agreement)
    text = f"{feet} ft {inches!r} in"
    assert units.length_m(text) == pytest.approx(feet * 0.3048 + inches * 0.0254, rel=1e-12, abs=1e-15)


# --- temperatures -----------------------------------------------------------------


@pytest.mark.parametrize("text, kelvin", [
    # 0 C = 273.15 K and F = 9/5 C + 32 (definitions of the Celsius and Fahrenheit scales)
    ("20 C", 293.15),
    ("20 °C", 293.15),
    ("20 degC", 293.15),
    ("68 F", 293.15),
    ("32 F", 273.15),
    ("-40 F", 233.15),
    ("-40 C", 233.15),
    ("293.15 K", 293.15),
    ("212 °F", 373.15),
])
def test_temperature_units(text, kelvin):
    assert units.temperature_k(text) == pytest.approx(kelvin, abs=1e-9)


@given(st.floats(-200.0, 500.0, allow_nan=False))
def test_celsius_and_fahrenheit_agree(celsius):
    # F = 9/5 C + 32 (definition)
    fahrenheit = celsius * 9.0 / 5.0 + 32.0
    assert units.temperature_k(f"{fahrenheit!r} F") == pytest.approx(
        units.temperature_k(f"{celsius!r} C"), abs=1e-9)


# --- times ------------------------------------------------------------------------


@pytest.mark.parametrize("text, seconds", [
    ("1:05.5", 65.5),
    ("0:00.0", 0.0),
    ("12:30", 750.0),
    ("1:02:03", 3723.0),
    ("12 s", 12.0),
    ("250 ms", 0.25),
    ("2 min", 120.0),
    (12, 12.0),
])
def test_durations(text, seconds):
    assert units.duration_s(text) == pytest.approx(seconds)


@pytest.mark.parametrize("seconds, text", [(75.25, "1:15.2"), (0.0, "0:00.0"), (59.96, "1:00.0"),
                                           (3600.0, "60:00.0"), (-5.0, "-0:05.0")])
def test_format_time(seconds, text):
    assert units.format_time(seconds) == text


def test_format_time_not_finite():
    assert units.format_time(math.nan) == "--:--"


@given(st.floats(0.0, 36000.0, allow_nan=False))
def test_format_time_round_trips_to_a_tenth(seconds):
    assert units.duration_s(units.format_time(seconds)) == pytest.approx(seconds, abs=0.05 + 1e-9)


# --- decibels ---------------------------------------------------------------------


def test_db_round_trip():
    # 20 log10 of an amplitude ratio (definition of the decibel for field quantities)
    assert units.db(10.0) == pytest.approx(20.0)
    assert units.db(0.5) == pytest.approx(-6.0206, abs=1e-4)
    assert units.undb(-20.0) == pytest.approx(0.1)
    assert units.db(0.0) == -math.inf


# --- bad input --------------------------------------------------------------------


@pytest.mark.parametrize("func, value", [
    (units.length_m, "2 furlongs"),
    (units.length_m, "two metres"),
    (units.length_m, "6 ft 6"),          # bare number mixed with units
    (units.length_m, ""),
    (units.length_m, True),
    (units.length_m, None),
    (units.length_m, [2.0]),
    (units.length_m, math.inf),
    (units.length_m, math.nan),
    (units.length_m, "1e999 m"),
    (units.length_m, "1/0 in"),
    (units.length_m, "1/16"),             # a bare fraction would be metres: a slip for inches
    (units.length_m, "-1/16 in"),
    (units.pressure_pa, "20 atm"),
    (units.pressure_pa, "20 Pa 3 Pa"),
    (units.pressure_pa, "Pa"),
    (units.frequency_hz, "110 rpm"),
    (units.temperature_k, "20 X"),
    (units.temperature_k, "-300 C"),      # below absolute zero
    (units.temperature_k, 0),
    (units.temperature_k, "warm"),
    (units.duration_s, "1:75"),           # seconds must be below 60
    (units.duration_s, "1:2:3:4"),
    (units.duration_s, "a:bc"),
    (units.duration_s, "-1:05"),
])
def test_bad_values_raise_one_line_naming_the_field(func, value):
    with pytest.raises(InputError) as info:
        func(value, "rig.toml: tube.length")
    line = info.value.line()
    assert "\n" not in line
    assert line.startswith("rig.toml: tube.length: ")
    assert info.value.fix  # says how to fix it
    assert str(info.value) == line


def test_unknown_unit_message_lists_known_units():
    with pytest.raises(InputError) as info:
        units.pressure_pa("3 atm", "--static")
    assert "atm" in info.value.what
    assert "inH2O" in info.value.fix and "mbar" in info.value.fix


# --- the one number-or-text step and the one gain reader ---------------------------


@given(st.floats(allow_nan=False, allow_infinity=False))
def test_number_or_text_reads_plain_numbers(x):
    # reference: Python's own float(repr(x)) round trip
    assert units.number_or_text(repr(x)) == x
    assert units.number_or_text(x) is x


@pytest.mark.parametrize("text", ["18 Pa", "0:42", "", "twelve"])
def test_number_or_text_leaves_text_with_units(text):
    assert units.number_or_text(text) == text


@pytest.mark.parametrize("value, gain", [(-12, -12.0), ("-12", -12.0), ("-12 dB", -12.0), (" +3.5db ", 3.5),
                                         ("-6.02 DB", -6.02)])
def test_gain_db_reads_numbers_and_db_text(value, gain):
    assert units.gain_db(value, "--gain") == gain


@pytest.mark.parametrize("value", ["loud", "inf", "nan dB", True, None, [1]])
def test_gain_db_refuses_with_where_and_fix(value):
    from showkit.errors import SheetError

    with pytest.raises(SheetError) as info:
        units.gain_db(value, "show.toml: cue a: gain", "write gain = -12 (dB)", error=SheetError)
    line = info.value.line()
    assert line.startswith("show.toml: cue a: gain: ") and line.endswith("write gain = -12 (dB)")


@pytest.mark.parametrize("semitones", [0.5, 1.58, -0.5, -2.0, -1.4999, 3.0])
def test_format_semitones_is_one_signed_figure(semitones):
    """Every shift reads as signed semitones to the cent, never a mix of "st" and "c" parts.

    Reference: the figure read back equals the shift rounded to 0.01 semitone (1 cent,
    100 cents to the equal-tempered semitone, closed form).
    """
    text = units.format_semitones(semitones)
    number, unit = text.split(" ")
    assert unit == "st" and number[0] in "+-" and " c" not in text
    assert float(number) == pytest.approx(round(semitones, 2), abs=1e-9)
    assert len(number.split(".")[1]) == 2


def test_format_semitones_never_shows_minus_zero():
    assert units.format_semitones(-0.001) == "+0.00 st"
    assert units.format_semitones(math.nan) == "-"


def test_counts_agree_with_their_words():
    """English agreement (common practice, no source): one takes the singular, zero and many the plural."""
    from showkit.units import agree, format_count, format_every

    assert [agree(n, "needs", "need") for n in (0, 1, 2)] == ["need", "needs", "need"]
    assert [format_count(n, "cue") for n in (0, 1, 3)] == ["0 cues", "1 cue", "3 cues"]
    assert [format_every(n, "cue") for n in (1, 5)] == ["the one cue", "all 5 cues"]


@pytest.mark.parametrize("parse", [units.length_m, units.pressure_pa, units.frequency_hz, units.temperature_k,
                                   units.duration_s, units.gain_db])
@pytest.mark.parametrize("text", ["9" * 300 + " Hz", "1" + " " * 65536 + "x", "-" * 5000],
                         ids=["digits", "spaces", "dashes"])
def test_a_pasted_screenful_is_refused_quickly_in_one_short_line(parse, text):
    # a value is a few characters; a long paste is refused before the unit pattern reads it
    # (64 k spaces took 1.5 s there) and the error line quotes only its start
    import time

    t0 = time.perf_counter()
    with pytest.raises(ShowkitError) as err:
        parse(text, "--value")
    assert time.perf_counter() - t0 < 0.5
    line = err.value.line()
    assert len(line) < 250 and f"{len(text)} characters" in line and line.startswith("--value: ")


def test_an_error_line_keeps_each_part_short():
    # the backstop for any quoted field or path: its start and end stay, the middle is counted
    from showkit.errors import SheetError

    line = SheetError("cue id " + "x" * 5000 + " END is unknown", "show.toml", "fix it").line()
    assert len(line) < 700 and "END is unknown" in line and line.endswith("-- fix it")
    assert "characters ...]" in line


@pytest.mark.parametrize("text, number", [("18", 18.0), (" 1e3 ", 1000.0), ("-0.5", -0.5), ("1_000", None),
                                          ("1" * 101, None), ("18 Pa", None), ("nan", "nan"), ("-inf", "inf")])
def test_number_or_text_reads_plain_numbers_only(text, number):
    # float() also takes "1_000" and any number of digits; those stay text, for the unit parsers to refuse
    got = units.number_or_text(text)
    if number is None:
        assert got == text
    elif isinstance(number, str):
        assert isinstance(got, float) and not math.isfinite(got)
    else:
        assert got == number
