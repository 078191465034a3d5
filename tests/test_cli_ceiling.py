"""`showkit ceiling`: output contract, overrides, time syntax, bad files (issue 3)."""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
import soundfile as sf

from showkit.cli.main import main
from signal_support import faded_sine

KEYS = {"ceiling_db", "output_peak_dbfs", "limited_by", "min_pressure_pa", "worst_hole",
        "worst_time_s", "contrast"}


def _sine(rate, seconds, freq=120.0, amp=0.01, fade_s=0.5, channels=1):
    x = faded_sine(freq, amp, seconds, rate, fade_s)
    return np.repeat(x[:, None], channels, axis=1) if channels > 1 else x


@pytest.fixture(scope="module")
def track(tmp_path_factory):
    path = tmp_path_factory.mktemp("cli") / "tone.flac"
    sf.write(path, _sine(44100, 4.0, channels=2), 44100, subtype="PCM_24")
    return path


def _run(capsys, *argv):
    status = main(["ceiling", *map(str, argv)])
    out, err = capsys.readouterr()
    return status, out, err


def _json(capsys, *argv):
    status, out, err = _run(capsys, *argv, "--json")
    assert status == 0, err
    assert err.startswith("CAUTION:")  # the level caution, on stderr
    return json.loads(out)


def test_json_contract(capsys, track):
    data = _json(capsys, track)
    assert KEYS <= set(data)
    assert data["limited_by"] in ("pressure", "full_scale")
    assert isinstance(data["worst_hole"], int) and 0 <= data["worst_hole"] < 80
    assert 0.0 <= data["contrast"] <= 1.0
    assert data["limited_by"] == "pressure"
    # at a pressure-limited ceiling the closest hole sits on the safe line: reserve x static
    assert data["min_pressure_pa"] == pytest.approx(data["reserve"] * data["static_pressure_pa"], rel=1e-9)
    assert data["output_peak_dbfs"] == pytest.approx(data["ceiling_db"] + 20 * math.log10(0.01), abs=0.01)
    assert 0.0 <= data["worst_time_s"] <= 4.5
    assert "mass-controlled" in data["drive"]


def test_static_and_reserve_overrides_move_the_ceiling_exactly(capsys, track):
    base = _json(capsys, track)
    static = _json(capsys, track, "--static", "18 Pa")
    assert static["static_pressure_pa"] == 18.0
    assert static["ceiling_db"] - base["ceiling_db"] == pytest.approx(20 * math.log10(18 / 20), abs=1e-9)
    reserve = _json(capsys, track, "--reserve", "0.3")
    assert reserve["ceiling_db"] - base["ceiling_db"] == pytest.approx(
        20 * math.log10((1 - 0.3) / (1 - base["reserve"])), abs=1e-9)
    inches = _json(capsys, track, "--static", "0.1 inH2O")  # 24.9089 Pa (DEVELOPERS.md Methods §10)
    assert inches["ceiling_db"] - base["ceiling_db"] == pytest.approx(
        20 * math.log10(24.9089 / 20), abs=1e-4)


def test_time_syntax(capsys, track):
    data = _json(capsys, track, "--start", "0:01", "--end", "0:02.5")
    assert data["start_s"] == 1.0 and data["end_s"] == 2.5
    assert 1.0 <= data["worst_time_s"] <= 2.5 + 2.5  # the ring-down may come after the end
    same = _json(capsys, track, "--start", "1", "--end", "2.5 s")
    assert same["ceiling_db"] == data["ceiling_db"]


def test_text_output(capsys, track):
    status, out, err = _run(capsys, track)
    assert status == 0
    assert "ceiling" in out and "dB" in out and "rests on" in out and "calibration" in out
    assert "CAUTION" in err


def test_same_tone_at_8k_and_96k_gives_the_same_ceiling(capsys, tmp_path):
    ceilings = []
    for rate in (8000, 96000):
        path = tmp_path / f"tone{rate}.wav"
        sf.write(path, _sine(rate, 3.0), rate, subtype="FLOAT")
        ceilings.append(_json(capsys, path)["ceiling_db"])
    assert abs(ceilings[0] - ceilings[1]) < 0.2


def test_silence(capsys, tmp_path):
    path = tmp_path / "silence.wav"
    sf.write(path, np.zeros(8000), 8000)
    data = _json(capsys, path)
    assert data["limited_by"] == "full_scale" and data["ceiling_db"] == 60.0
    assert data["output_peak_dbfs"] is None  # -inf: no signal at all


def _bad_files(tmp):
    files = {}
    files["empty"] = tmp / "empty.wav"
    files["empty"].write_bytes(b"")
    files["text"] = tmp / "text.flac"
    files["text"].write_text("not audio at all\n" * 50)
    full = tmp / "full.flac"
    sf.write(full, _sine(44100, 2.0), 44100, subtype="PCM_16")
    files["truncated"] = tmp / "cut.flac"
    files["truncated"].write_bytes(full.read_bytes()[:full.stat().st_size // 2])
    x = _sine(8000, 1.0)
    x[100] = np.nan
    files["nan"] = tmp / "nan.wav"
    sf.write(files["nan"], x, 8000, subtype="FLOAT")
    files["missing"] = tmp / "missing.wav"
    return files


@pytest.mark.parametrize("kind", ["empty", "text", "truncated", "nan", "missing"])
def test_bad_files_are_one_clear_line(capsys, tmp_path, kind):
    path = _bad_files(tmp_path)[kind]
    status, out, err = _run(capsys, path)
    assert status == 2
    assert out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("showkit:") and str(path) in lines[0]


def test_bad_options_are_one_clear_line(capsys, track):
    for argv in (["--static", "-3 Pa"], ["--reserve", "1.5"], ["--start", "9:00"],
                 ["--start", "0:99"], ["--start", "2", "--end", "1"]):
        status, out, err = _run(capsys, track, *argv)
        assert status == 2, argv
        lines = err.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("showkit:"), (argv, err)


def test_subprocess_exit_status_and_no_traceback(tmp_path):
    files = _bad_files(tmp_path)
    short = tmp_path / "short.wav"
    sf.write(short, _sine(44100, 0.05, fade_s=0.01), 44100)
    for kind in ("empty", "nan"):
        res = subprocess.run([sys.executable, "-m", "showkit", "ceiling", str(files[kind])],
                             capture_output=True, text=True, timeout=120)
        assert res.returncode == 2
        assert "Traceback" not in res.stderr
        lines = res.stderr.strip().splitlines()
        assert len(lines) == 1 and lines[0].startswith("showkit:")
    # a 0.05 s file: a correct answer (or a clear error), never a traceback
    res = subprocess.run([sys.executable, "-m", "showkit", "ceiling", str(short), "--json"],
                         capture_output=True, text=True, timeout=120)
    assert "Traceback" not in res.stderr
    if res.returncode == 0:
        data = json.loads(res.stdout)
        assert KEYS <= set(data) and math.isfinite(data["ceiling_db"])
    else:
        assert res.returncode == 2 and res.stderr.strip().startswith("showkit:")
