"""`showkit lock`, `check` and `render` as a presenter uses them (issue 5)."""

from __future__ import annotations

import json
import math
import shutil
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from showkit.cli.main import main

ROOT = Path(__file__).resolve().parent.parent
DEMO_SHOW = ROOT / "showkit" / "data" / "demo_show.toml"

SHEET = '''title = "cli test"
rig = "demo"
format = 1

[[cue]]
id = "m3"
label = "mode 3"
tone = { mode = 3, duration = 2 }
gain = -10
fade_in = 0.3
fade_out = 0.3

[[cue]]
id = "wait"
pause = { duration = 1 }

[[cue]]
id = "clip"
audio = "clip.wav"
start = "0:00.5"
end = "0:02.5"
gain = -40
fade_in = 0.2
fade_out = 0.2
then = "next"
'''


@pytest.fixture
def sheet(tmp_path):
    t = np.arange(3 * 44100) / 44100
    sf.write(tmp_path / "clip.wav", 0.3 * np.sin(2 * np.pi * 186.0 * t), 44100)
    path = tmp_path / "show.toml"
    path.write_text(SHEET)
    return path


def test_lock_check_render_round(sheet, capsys, tmp_path):
    assert main(["lock", str(sheet)]) == 0
    out = capsys.readouterr()
    assert "clamped: cue m3" in out.out  # -10 dB is far above a mode's ceiling
    assert "CAUTION" in out.err
    assert (tmp_path / "show.toml.bak").read_text() == SHEET

    assert main(["check", str(sheet), "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert [c["id"] for c in data["cues"]] == ["m3", "wait", "clip"]
    for c in data["cues"]:
        assert set(c) >= {"id", "gain_db", "ceiling_db", "headroom_db", "status", "message"}
        assert c["status"] == "ok" and c["headroom_db"] >= 0

    # today's manometer reads half: every pressure ceiling comes down by 6.02 dB
    assert main(["check", str(sheet), "--static", "10 Pa", "--json"]) == 2
    low = json.loads(capsys.readouterr().out)
    for before, after in zip(data["cues"], low["cues"]):
        if before["id"] != "wait":
            assert after["ceiling_db"] - before["ceiling_db"] == pytest.approx(-20 * math.log10(2), abs=1e-6)
    assert low["cues"][0]["status"] == "over" and "bring it down" in low["cues"][0]["message"]

    assert main(["render", str(sheet), "--per-cue", str(tmp_path / "out")]) == 0
    text = capsys.readouterr().out
    assert "margin Pa" in text and "verified" in text
    files = sorted((tmp_path / "out").glob("*.wav"))
    assert [f.name for f in files] == ["01-m3.wav", "02-wait.wav", "03-clip.wav"]
    info = sf.info(files[0])
    assert (info.samplerate, info.subtype) == (48000, "FLOAT")  # tones at 48 kHz
    assert sf.info(files[2]).samplerate == 44100  # passages at the source rate

    assert main(["render", str(sheet), "-o", str(tmp_path / "show.wav"), "--bits", "24"]) == 0
    info = sf.info(tmp_path / "show.wav")
    assert (info.samplerate, info.subtype) == (48000, "PCM_24")
    assert info.duration == pytest.approx(2 + 1 + 2, abs=0.01)


def test_stale_cue_is_refused_with_how_to_fix(sheet, capsys, tmp_path):
    assert main(["lock", str(sheet)]) == 0
    capsys.readouterr()
    t = np.arange(3 * 44100) / 44100
    sf.write(tmp_path / "clip.wav", 0.31 * np.sin(2 * np.pi * 186.0 * t), 44100)
    assert main(["check", str(sheet), "--json"]) == 2
    cues = {c["id"]: c for c in json.loads(capsys.readouterr().out)["cues"]}
    assert cues["clip"]["status"] == "stale" and cues["clip"]["ceiling_db"] is None
    assert cues["m3"]["status"] == "ok"
    assert main(["render", str(sheet), "-o", str(tmp_path / "x.wav")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "cue clip" in err[0] and "showkit lock" in err[0]
    assert not (tmp_path / "x.wav").exists()


@pytest.mark.parametrize("edit, needles, process", [
    (("clip.wav", "missing.wav"), ["cue clip", "no such audio file"], True),
    (('end = "0:02.5"', 'end = "0:09"'), ["cue clip", "past the end"], False),
    (("mode = 3", "mode = 99"), ["cue m3", "no mode 99"], False),
    (("tone = { mode = 3, duration = 2 }", 'tone = { frequency = "5 kHz", duration = 2 }'),
     ["cue m3", "plane-wave limit"], False),
    (('id = "wait"', 'id = "m3"'), ["duplicate"], False),
    (("gain = -40", 'gain = "quiet"'), ["cue clip", "gain"], True),
])
def test_bad_sheets_give_one_line_and_exit_2(sheet, edit, needles, process, capsys, monkeypatch):
    """``process``: the real command line in its own process (exit status, no traceback); the other
    cases call the same ``main`` in this process (an exception would fail the test as a traceback)."""
    sheet.write_text(SHEET.replace(*edit))
    before = sheet.read_text()
    if process:
        proc = subprocess.run([sys.executable, "-m", "showkit", "lock", str(sheet)],
                              capture_output=True, text=True, cwd=sheet.parent)
        status, stderr = proc.returncode, proc.stderr
    else:
        monkeypatch.chdir(sheet.parent)
        capsys.readouterr()
        status = main(["lock", str(sheet)])
        stderr = capsys.readouterr().err
    assert status == 2, stderr
    lines = [line for line in stderr.splitlines() if not line.startswith("CAUTION")]
    assert len(lines) == 1 and "Traceback" not in stderr
    assert lines[0].startswith("showkit: ") and str(sheet) in lines[0]
    for needle in needles:
        assert needle in lines[0]
    assert sheet.read_text() == before  # a sheet that fails is never overwritten


def test_example_sheets_lock_check_and_render(tmp_path, capsys):
    for example in sorted((ROOT / "cues").glob("*.toml")):
        copy = tmp_path / "cues" / example.name
        copy.parent.mkdir(exist_ok=True)
        shutil.copy(example, copy)
        if not (tmp_path / "demo_audio").exists():
            shutil.copytree(ROOT / "demo_audio", tmp_path / "demo_audio")
        assert main(["lock", str(copy)]) == 0, example
        assert main(["check", str(copy)]) == 0, example
        assert main(["render", str(copy), "-o", str(tmp_path / f"{example.stem}.wav")]) == 0, example
        capsys.readouterr()


PAUSE_SHEET = '''title = "pause"
rig = "demo"
format = 1

[[cue]]
id = "m2"
tone = { mode = 2, duration = 1 }
gain = -40

[[cue]]
id = "talk"
pause = { duration = 1 }
gain = GAIN
'''


def _row(text, cue_id):
    return next(line.split() for line in text.splitlines() if line.split()[:1] == [cue_id])


def test_a_pause_shows_silence_not_a_ceiling(tmp_path, capsys):
    """A pause plays nothing: lock, check and render call its ceiling "silence" (an earlier
    table gave it "+60.00", the cap on the gain of silence) and give it no headroom, while
    the tone beside it keeps its figures.  Reference: zero samples stay zero at any gain
    (closed form), so no level exists to cap."""
    path = tmp_path / "show.toml"
    path.write_text(PAUSE_SHEET.replace("GAIN", "0"))
    assert main(["lock", str(path)]) == 0
    lock = capsys.readouterr().out
    assert _row(lock, "talk")[3:5] == ["silence", "-"]  # ceiling dB, limited by
    assert float(_row(lock, "m2")[3]) < 0
    assert main(["check", str(path)]) == 0
    check = capsys.readouterr().out
    talk = _row(check, "talk")
    assert talk[2:4] == ["silence", "-"] and talk[4] == "ok" and "plays nothing" in " ".join(talk)
    assert "+60" not in check
    assert main(["render", str(path), "-o", str(tmp_path / "show.wav")]) == 0
    render = capsys.readouterr().out
    assert _row(render, "talk")[2] == "silence" and "+60" not in render
    # the data keeps the rule's numbers: the ceiling is the cap on silence
    assert main(["check", str(path), "--json"]) == 0
    cue = json.loads(capsys.readouterr().out)["cues"][1]
    assert cue["silent"] is True and cue["ceiling_db"] == 60.0 and cue["status"] == "ok"


def test_a_pause_above_the_cap_is_still_over(tmp_path, capsys):
    """The rule is the same for a pause: a gain above its locked ceiling (the cap on silence)
    is refused, and then the ceiling is given as a figure to come down to."""
    path = tmp_path / "show.toml"
    path.write_text(PAUSE_SHEET.replace("GAIN", "0"))
    assert main(["lock", str(path)]) == 0
    path.write_text(path.read_text().replace("gain = 0.0", "gain = 70.0").replace("gain = 0\n", "gain = 70\n"))
    capsys.readouterr()
    assert main(["check", str(path)]) == 2
    talk = _row(capsys.readouterr().out, "talk")
    assert talk[2] == "+60.00" and "over" in talk
