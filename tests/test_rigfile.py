"""The rig file (showkit.rigfile): the demo loads, units are read, every bad input is one clear line."""

from __future__ import annotations

import numpy as np
import pytest

from showkit.errors import RigError
from showkit.rigfile import demo_rig_path, load_rig
from showkit.rigfile import parse_rig as _parse_checked


def parse_rig(text, where="rig", path=None):
    """These tests are about the fields: GOOD's default calibration at 100 Hz sits near its
    mode 2, which the calibration-point check refuses (issue 13; tested in test_family.py)."""
    return _parse_checked(text, where, path, check_calibration=False)


GOOD = '''name = "Test tube"
[tube]
length = "2 m"
bore = "75 mm"
wall = "2 mm"
[holes]
count = 10
spacing = "50 mm"
first = "0.5 m"
diameter = "1.5 mm"
[gas]
fuel = "propane"
'''


def _swap(old: str, new: str, text: str = GOOD) -> str:
    assert old in text
    return text.replace(old, new, 1)


def test_demo_rig_loads():
    rig = load_rig()
    assert rig.path == demo_rig_path() and rig.name
    g = rig.geometry
    assert g.hole_count > 0 and 0 < g.positions[0] and g.positions[-1] < g.length_m
    assert g.hole_diameter_m < g.bore_m / 4
    assert rig.fuel in ("propane", "butane", "isobutane", "methane", "natural-gas")
    assert 0 <= rig.air_fraction <= 0.5 and 0 <= rig.reserve <= 0.9 and rig.static_pa > 0
    assert 200 < rig.gas.sound_speed_m_s < 500


def test_good_rig_in_si():
    rig = parse_rig(GOOD, "my.toml")
    g = rig.geometry
    assert (g.length_m, g.bore_m, g.wall_m, g.hole_diameter_m) == pytest.approx((2.0, 0.075, 0.002, 0.0015))
    assert np.allclose(g.positions, 0.5 + 0.05 * np.arange(10))
    # defaults (README): 20 C, 20 Pa, no air, 101 325 Pa ambient, reserve 0.25
    assert rig.temperature_k == pytest.approx(293.15)
    assert rig.static_pa == 20.0 and rig.air_fraction == 0.0
    assert rig.ambient_pa == 101325.0 and rig.reserve == 0.25
    assert rig.name == "Test tube"


def test_units_in_rig_files():
    # exact definitions: 6 ft 6 in = 1.9812 m; inH2O 249.089 Pa (DEVELOPERS.md Methods §10); 68 F = 20 C
    text = _swap('length = "2 m"', 'length = "6 ft 6 in"')
    text = _swap('fuel = "propane"', 'fuel = "propane"\nstatic_pressure = "0.1 inH2O"\n'
                 'temperature = "68 F"\nambient = "1000 mbar"', text)
    text = _swap('diameter = "1.5 mm"', 'diameter = "0.0625 in"', text)
    rig = parse_rig(text, "my.toml")
    assert rig.geometry.length_m == pytest.approx(1.9812, abs=1e-12)
    assert rig.static_pa == pytest.approx(24.9089, abs=1e-3)
    assert rig.temperature_k == pytest.approx(293.15, abs=1e-9)
    assert rig.ambient_pa == pytest.approx(100000.0)
    assert rig.geometry.hole_diameter_m == pytest.approx(0.0015875)


def test_plain_numbers_are_si():
    text = GOOD.replace('"2 m"', "2.0").replace('"75 mm"', "0.075").replace('"0.5 m"', "0.5")
    rig = parse_rig(text + "temperature = 300\nstatic_pressure = 30\n", "my.toml")
    assert rig.geometry.length_m == 2.0 and rig.geometry.bore_m == 0.075
    assert rig.temperature_k == 300.0 and rig.static_pa == 30.0


def test_positions_list_replaces_count_spacing_first():
    text = _swap('count = 10\nspacing = "50 mm"\nfirst = "0.5 m"\n',
                 'positions = ["0.3 m", "35 cm", 0.41, "1 ft 6 in"]\n')
    rig = parse_rig(text, "my.toml")
    assert rig.geometry.positions == pytest.approx([0.3, 0.35, 0.41, 0.4572])
    # giving both ways at once is refused rather than silently preferring one
    with pytest.raises(RigError) as info:
        parse_rig(_swap('count = 10', 'count = 10\npositions = [0.5]'), "my.toml")
    assert "my.toml: holes.positions" in info.value.line()


def test_count_zero_is_a_plain_pipe():
    rig = parse_rig(_swap('count = 10\nspacing = "50 mm"\nfirst = "0.5 m"\ndiameter = "1.5 mm"\n',
                          'count = 0\n'), "my.toml")
    assert rig.geometry.hole_count == 0
    no_section = parse_rig(GOOD.split("[holes]")[0] + '[gas]\nfuel = "propane"\n', "my.toml")
    assert no_section.geometry.hole_count == 0


def test_outflow_resistance_option():
    rig = parse_rig(_swap('diameter = "1.5 mm"', 'diameter = "1.5 mm"\nresistance = "outflow"'), "my.toml")
    assert rig.geometry.hole_resistance_pa_s_m3 > 0
    fixed = parse_rig(_swap('diameter = "1.5 mm"', 'diameter = "1.5 mm"\nresistance = "5e6 Pa s/m3"'),
                      "my.toml")
    assert fixed.geometry.hole_resistance_pa_s_m3 == pytest.approx(5e6)


BAD = {
    # id: (rig text, field named in the message, words the message must hold)
    "syntax error": (_swap('fuel = "propane"', "fuel = propane"), None, ["TOML", "line 12", "column"]),
    "unknown field": (_swap("length =", "lenght ="), "tube.lenght", ["unknown field", "'length'"]),
    "unknown section": (_swap("[holes]", "[hole]"), "hole", ["unknown field", "'holes'"]),
    "unknown top field": (_swap('name = "Test tube"', 'nmae = "Test tube"'), "nmae", ["'name'"]),
    "missing field": (_swap('bore = "75 mm"\n', ""), "tube.bore", ["missing"]),
    "wrong type list": (_swap('"2 m"', "[2]"), "tube.length", ["expected a length"]),
    "wrong type bool": (_swap('"75 mm"', "true"), "tube.bore", ["expected a length"]),
    "wrong type count": (_swap("count = 10", "count = 10.5"), "holes.count", ["whole number"]),
    "wrong type air": (GOOD + 'air_fraction = "lots"\n', "gas.air_fraction", ["expected a number"]),
    "wrong type name": (_swap('name = "Test tube"', "name = 3"), "name", ["expected text"]),
    "section not table": (_swap('name = "Test tube"', 'name = "Test tube"\nholes = 3',
                                GOOD.split("[holes]")[0] + '[gas]\nfuel = "propane"\n'), "holes", ["section"]),
    "zero length": (_swap('"2 m"', "0"), "tube.length", ["greater than zero"]),
    "negative bore": (_swap('"75 mm"', '"-75 mm"'), "tube.bore", ["greater than zero"]),
    "zero wall": (_swap('wall = "2 mm"', 'wall = "0 mm"'), "tube.wall", ["greater than zero"]),
    "zero hole": (_swap('"1.5 mm"', '"0 mm"'), "holes.diameter", ["greater than zero"]),
    "negative spacing": (_swap('"50 mm"', '"-50 mm"'), "holes.spacing", ["greater than zero"]),
    "negative count": (_swap("count = 10", "count = -3"), "holes.count", ["negative"]),
    "bore not below length": (_swap('"75 mm"', '"3 m"'), "tube.bore", ["outside the plausible"]),
    "hole past the cap": (_swap('"0.5 m"', '"1.7 m"'), "holes.first", ["outside the tube"]),
    "hole before the membrane": (_swap('"0.5 m"', '"-0.1 m"'), "holes.first", ["outside the tube"]),
    "positions outside": (_swap('count = 10\nspacing = "50 mm"\nfirst = "0.5 m"\n',
                                'positions = [0.5, 2.5]\n'), "holes.positions", ["outside the tube"]),
    "overlapping holes": (_swap('"50 mm"', '"1 mm"'), "holes.spacing", ["overlap"]),
    "overlapping positions": (_swap('count = 10\nspacing = "50 mm"\nfirst = "0.5 m"\n',
                                    'positions = [0.5, 0.501]\n'), "holes.positions", ["overlap"]),
    "positions out of order": (_swap('count = 10\nspacing = "50 mm"\nfirst = "0.5 m"\n',
                                     'positions = [0.6, 0.5]\n'), "holes.positions", ["order"]),
    "hole too big": (_swap('"1.5 mm"', '"30 mm"'), "holes.diameter", ["outside the plausible"]),
    "air fraction high": (GOOD + "air_fraction = 0.7\n", "gas.air_fraction", ["0.5"]),
    "air fraction negative": (GOOD + "air_fraction = -0.1\n", "gas.air_fraction", ["0.5"]),
    "unknown fuel near": (_swap('"propane"', '"propan"'), "gas.fuel", ["unknown fuel", "'propane'"]),
    "unknown fuel": (_swap('"propane"', '"hydrogen"'), "gas.fuel", ["unknown fuel", "methane"]),
    "unknown length unit": (_swap('"2 m"', '"2 furlong"'), "tube.length", ["unit", "furlong"]),
    "unknown pressure unit": (GOOD + 'static_pressure = "20 atm"\n', "gas.static_pressure", ["atm"]),
    "unknown temperature unit": (GOOD + 'temperature = "20 X"\n', "gas.temperature", ["temperature"]),
    "bad position unit": (_swap('count = 10\nspacing = "50 mm"\nfirst = "0.5 m"\n',
                                'positions = ["0.5 m", "0.6 parsecs"]\n'), "holes.positions[1]", ["unit"]),
    "reserve out of range": (GOOD + "[safety]\nreserve = 0.95\n", "safety.reserve", ["0.9"]),
    "absurd static pressure": (GOOD + 'static_pressure = "2 bar"\n', "gas.static_pressure", ["unit"]),
    "level above full scale": (GOOD + "[drive]\nreference_level = 3\n", "drive.reference_level",
                               ["full scale"]),
    # issue 11: each of these once became a full-scale ceiling (fails open) or a 3 km tube
    "level nan": (GOOD + "[drive]\nreference_level = nan\n", "drive.reference_level", ["finite"]),
    "level -inf": (GOOD + "[drive]\nreference_level = -inf\n", "drive.reference_level", ["finite"]),
    "speaker q inf": (GOOD + "[drive]\nspeaker_q = inf\n", "drive.speaker_q", ["finite"]),
    "response db nan": (GOOD + '[drive]\nresponse_frequencies = [50, 100]\nresponse_db = [nan, nan]\n',
                        "drive.response_db", ["finite"]),
    "response db inf": (GOOD + '[drive]\nresponse_frequencies = [50, 100]\nresponse_db = [inf, 0]\n',
                        "drive.response_db", ["finite"]),
    "response frequencies negative": (GOOD + '[drive]\nresponse_frequencies = [-50, 0]\nresponse_db = [0, 0]\n',
                                      "drive.response_frequencies", ["outside"]),
    "length 1e300": (_swap('"2 m"', '"1e300 m"'), "tube.length", ["outside the plausible"]),
    "wall 1e300": (_swap('wall = "2 mm"', 'wall = "1e300 m"'), "tube.wall", ["outside the plausible"]),
    "bare length 3000": (_swap('"2 m"', '3000'), "tube.length", ["3000 m", "bare number is metres"]),
    "too many holes": (_swap("count = 10", "count = 50000"), "holes.count", ["2000"]),
    "static 9000 Pa": (GOOD + 'static_pressure = "9000 Pa"\n', "gas.static_pressure", ["500"]),
    "static nan": (GOOD + 'static_pressure = nan\n', "gas.static_pressure", ["finite"]),
    "temperature bare 24": (GOOD + 'temperature = 24\n', "gas.temperature", ["-40 to 100 C", "kelvin"]),
}


@pytest.mark.parametrize("case", list(BAD), ids=list(BAD))
def test_bad_rig_gives_one_line_naming_file_and_field(case, write_rig):
    text, field, words = BAD[case]
    path = write_rig(text, "bad-rig.toml")
    with pytest.raises(RigError) as info:
        load_rig(path)
    line = info.value.line()
    assert "\n" not in line
    assert line.startswith(f"{path}: ")
    if field is not None:
        assert line.startswith(f"{path}: {field}: "), line
    for word in words:
        assert word in line, line
    assert info.value.fix, line


def test_missing_file(tmp_path):
    path = tmp_path / "nope.toml"
    with pytest.raises(RigError) as info:
        load_rig(path)
    assert info.value.line().startswith(f"{path}: no such rig file")


def test_folder_instead_of_file(tmp_path):
    with pytest.raises(RigError) as info:
        load_rig(tmp_path)
    assert str(tmp_path) in info.value.line() and "folder" in info.value.line()


def test_not_utf8(write_rig, tmp_path):
    path = tmp_path / "latin.toml"
    path.write_bytes(b'name = "caf\xe9"\n')
    with pytest.raises(RigError) as info:
        load_rig(path)
    assert str(path) in info.value.line()


def test_acoustic_hash_tracks_geometry_not_static_pressure():
    rig = parse_rig(GOOD, "my.toml")
    assert rig.acoustic_hash() == rig.with_conditions(static_pa=35.0).acoustic_hash()
    other = parse_rig(_swap('"2 m"', '"2.01 m"'), "my.toml")
    assert other.acoustic_hash() != rig.acoustic_hash()
