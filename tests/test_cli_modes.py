"""`showkit modes`: the output contract of issue 2, the table, user rigs and bad rigs."""

from __future__ import annotations

import json
import subprocess
import sys

import numpy as np
import pytest

from showkit.cli.main import main
from showkit.rigfile import load_rig

USER_RIG = '''name = "Garage tube"
[tube]
length = "5 ft"
bore = "3 in"
wall = "1.5 mm"
[holes]
count = 40
spacing = "1.25 in"
first = "4 in"
diameter = "0.0625 in"
[gas]
fuel = "butane"
air_fraction = 0.05
temperature = "68 F"
static_pressure = "0.08 inH2O"
[drive]
reference_frequency = "1289.7 Hz"   # where the tube's losses do not move the reading (issue 13)
'''


def _json(capsys, argv):
    assert main(argv) == 0
    out = capsys.readouterr().out
    return json.loads(out)


def _check_contract(report: dict, hole_count: int):
    # issue 2, "Output contract (later tools read it)"
    assert isinstance(report["rig"], str) and report["rig"]
    assert report["gas"]["sound_speed_m_s"] > 0 and report["gas"]["density_kg_m3"] > 0
    limit = report["plane_wave_limit_hz"]
    assert limit > 0
    modes = report["modes"]
    assert modes
    for k, m in enumerate(modes):
        assert set(m) >= {"n", "frequency_hz", "q", "note", "cents", "flame_peaks",
                          "peak_spacing_m", "shape"}
        assert isinstance(m["n"], int) and isinstance(m["flame_peaks"], int)
        assert 0 < m["frequency_hz"] < limit
        assert m["q"] is None or m["q"] > 0
        assert isinstance(m["note"], str) and -50 <= m["cents"] <= 50
        assert m["peak_spacing_m"] is None or m["peak_spacing_m"] > 0
        assert len(m["shape"]) == hole_count
        if hole_count:
            assert max(abs(v) for v in m["shape"]) == pytest.approx(1.0)
    if hole_count:
        # consecutive from the first: 0 (breathing) with still gas; 1 when the gas flowing out
        # of the holes takes their mass away (the best estimate since issue 13)
        first = modes[0]["n"]
        assert first in (0, 1) and [m["n"] for m in modes] == list(range(first, first + len(modes)))


def test_json_contract_on_the_demo(capsys):
    report = _json(capsys, ["modes", "--json"])
    rig = load_rig()
    _check_contract(report, rig.geometry.hole_count)
    assert report["rig"] == rig.name
    assert report["gas"]["sound_speed_m_s"] == pytest.approx(rig.gas.sound_speed_m_s)
    # issue 13: with the gas flowing out of the holes there is no breathing mode; mode 1 has one node
    assert report["modes"][0]["n"] == 1 and report["modes"][0]["peak_spacing_m"] > 0


def test_json_user_rig(capsys, write_rig):
    path = write_rig(USER_RIG, "garage.toml")
    report = _json(capsys, ["modes", "--rig", str(path), "--json", "--max-frequency", "600"])
    _check_contract(report, 40)
    assert report["rig"] == "Garage tube"
    assert all(m["frequency_hz"] < 600 for m in report["modes"])
    # 5 ft = 1.524 m and 3 in = 76.2 mm bore (exact definitions): limit 1.841 c / (2 pi a)
    # (DEVELOPERS.md Methods §3, Kinsler et al.; 1.8412 = first zero of J1', A&S table 9.5)
    c = report["gas"]["sound_speed_m_s"]
    assert report["plane_wave_limit_hz"] == pytest.approx(1.8412 * c / (2 * np.pi * 0.0381), rel=1e-4)
    # butane with 5 % air at 20 C: near CoolProp's n-butane 208.5 m/s (DEVELOPERS.md Methods §2), a little above
    assert 208.5 < c < 215


def test_plain_pipe_json(capsys, write_rig):
    text = USER_RIG.split("[holes]")[0] + '[holes]\ncount = 0\n[gas]\nfuel = "propane"\n'
    report = _json(capsys, ["modes", "--rig", str(write_rig(text)), "--json", "--max-frequency", "500"])
    _check_contract(report, 0)
    c, length = report["gas"]["sound_speed_m_s"], 1.524
    # textbook f_n = n c / 2 L (DEVELOPERS.md Methods §3)
    for m in report["modes"]:
        assert m["frequency_hz"] == pytest.approx(m["n"] * c / (2 * length), rel=5e-3)


def test_table_output(capsys):
    assert main(["modes"]) == 0
    out = capsys.readouterr().out
    rig = load_rig()
    assert rig.name in out
    assert "plane-wave limit" in out and "sound speed" in out
    header = next(line for line in out.splitlines() if line.split()[:1] == ["n"])
    for word in ("freq", "note", "cents", "Q", "flame", "spacing", "pattern"):
        assert word in header
    rows = [line.split() for line in out.splitlines() if line.split() and line.split()[0].isdigit()]
    assert [int(r[0]) for r in rows] == list(range(1, len(rows) + 1))
    assert rows[0][-1] != "breathing"  # issue 13: no breathing mode with the gas flowing


def test_bad_rig_exit_status_and_one_line(capsys, write_rig):
    path = write_rig(USER_RIG.replace("length =", "lenght ="), "typo.toml")
    assert main(["modes", "--rig", str(path)]) == 2
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1
    assert lines[0].startswith("showkit: ") and "tube.lenght" in lines[0] and "'length'" in lines[0]
    assert "Traceback" not in captured.err and captured.out == ""


def test_subprocess_json_and_errors(tmp_path):
    # the real command line, as a presenter runs it
    ok = subprocess.run([sys.executable, "-m", "showkit", "modes", "--json"],
                        capture_output=True, text=True, timeout=120)
    assert ok.returncode == 0, ok.stderr
    _check_contract(json.loads(ok.stdout), load_rig().geometry.hole_count)
    bad = tmp_path / "broken.toml"
    bad.write_text('[tube]\nlength = "2 m"\nbore = "80 mm"\nwall = "2 mm"\n[gas]\nfuel = "propan"\n')
    for argv in (["--rig", str(bad)], ["--rig", str(tmp_path / "missing.toml")]):
        run = subprocess.run([sys.executable, "-m", "showkit", "modes", *argv],
                             capture_output=True, text=True, timeout=120)
        assert run.returncode == 2
        lines = run.stderr.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("showkit: ")
        assert "Traceback" not in run.stderr


def test_help_mentions_units(capsys):
    with pytest.raises(SystemExit) as exit_info:
        main(["--help"])
    assert exit_info.value.code == 0
    top = capsys.readouterr().out
    for unit in ("mm", "ft", "inH2O", "mbar", "Pa"):
        assert unit in top
    assert "modes" in top
    with pytest.raises(SystemExit):
        main(["modes", "--help"])
    sub = capsys.readouterr().out
    assert "--rig" in sub and "--json" in sub and "--max-frequency" in sub
    assert "Hz" in sub


def test_no_help_text_shows_raw_markup():
    """Every command's --help is plain text: no reST double backticks from a docstring
    (``scan --help`` showed them twice after edits; the help is built from the module docstrings)."""
    from showkit.cli.main import build_parser

    parser, _ = build_parser()
    texts = [parser.format_help()]
    for action in parser._subparsers._group_actions:
        texts += [p.format_help() for p in action.choices.values()]
    assert len(texts) > 10
    bad = [t.splitlines()[0] for t in texts if "``" in t]
    assert not bad, bad
