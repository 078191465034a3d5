"""Output devices: listing, choosing, rates; the missing PortAudio library; a real null device."""

from __future__ import annotations

import ctypes.util
import json
import os
import subprocess
import sys

import pytest

from fake_sounddevice import make_sd
from showkit.cli.main import main
from showkit.errors import DeviceError
from showkit.show import devices

ASOUNDRC = "pcm.!default {\n    type null\n}\n"


def null_alsa_env(tmp_path) -> dict:
    """Environment for a subprocess whose ALSA default PCM is the null device."""
    home = tmp_path / "home"
    home.mkdir(exist_ok=True)
    (home / ".asoundrc").write_text(ASOUNDRC)
    env = dict(os.environ)
    env["HOME"] = str(home)
    env.pop("XDG_CONFIG_HOME", None)
    env["XDG_DATA_HOME"] = str(tmp_path / "data")
    env["PYTHONPATH"] = os.pathsep.join([os.getcwd()] + [p for p in [env.get("PYTHONPATH")] if p])
    return env


def portaudio_present() -> bool:
    return ctypes.util.find_library("portaudio") is not None


@pytest.fixture
def fake(monkeypatch):
    sd = make_sd(devices=[("USB Mic", 0, 48000.0, 1), ("Desk Speakers", 2, 48000.0, 0),
                          ("Hall Amp Left", 2, 44100.0, 0), ("Hall Amp Right", 2, 44100.0, 0)],
                 default_out=1, rates={1: {48000}, 2: {44100, 48000}, 3: {44100}})
    monkeypatch.setattr(devices, "import_sounddevice", lambda: sd)
    return sd


def test_lists_output_devices_only(fake):
    found = devices.list_output_devices()
    assert [d.index for d in found] == [1, 2, 3]
    assert found[0].name == "Desk Speakers" and found[0].is_default and found[0].channels == 2
    assert found[1].default_rate_hz == 44100.0 and found[1].hostapi == "FakeAPI"


def test_choose_by_index_name_or_default(fake):
    assert devices.choose_device(None).index == 1
    assert devices.choose_device(2).name == "Hall Amp Left"
    assert devices.choose_device("3").name == "Hall Amp Right"
    assert devices.choose_device("desk").index == 1  # case-insensitive part of the name
    assert devices.choose_device("AMP RIGHT").index == 3
    with pytest.raises(DeviceError, match="matches 2 devices") as err:
        devices.choose_device("hall")
    assert "2: Hall Amp Left" in err.value.line() and "3: Hall Amp Right" in err.value.line()
    with pytest.raises(DeviceError, match="no output device name holds"):
        devices.choose_device("kitchen")
    with pytest.raises(DeviceError, match="no output device with index 0"):
        devices.choose_device(0)  # an input-only device is not an output


def test_rate_negotiation(fake):
    desk, left, right = devices.list_output_devices()
    assert devices.negotiate_rate(left, 48000) == 48000
    assert devices.negotiate_rate(right, 48000) == 44100  # falls back to its default
    assert devices.negotiate_rate(desk, 44100) == 48000
    odd = devices.OutputDevice(1, "Desk Speakers", 2, 96000.0, "FakeAPI", True)
    with pytest.raises(DeviceError, match="takes none of the rates 44100 Hz, 96000 Hz"):
        devices.negotiate_rate(odd, 44100)


def test_no_output_device_is_a_clear_error(monkeypatch, capsys):
    sd = make_sd(devices=[("USB Mic", 0, 48000.0, 1)], default_out=-1)
    monkeypatch.setattr(devices, "import_sounddevice", lambda: sd)
    with pytest.raises(DeviceError, match="no audio output device"):
        devices.choose_device()
    assert main(["devices"]) == 2
    assert "no audio output device" in capsys.readouterr().err


def test_devices_command_table_and_json(fake, capsys):
    assert main(["devices"]) == 0
    text = capsys.readouterr().out
    assert "Desk Speakers" in text and "Hall Amp Left" in text and "USB Mic" not in text
    assert main(["devices", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert [d["index"] for d in data["devices"]] == [1, 2, 3]
    assert data["devices"][0]["is_default"] is True


def test_portaudio_library_hidden_gives_the_install_message(monkeypatch, capsys):
    # sounddevice looks the library up with ctypes.util.find_library and raises
    # OSError('PortAudio library not found') when it is missing (sounddevice 0.5 source).
    monkeypatch.delitem(sys.modules, "sounddevice", raising=False)
    monkeypatch.setattr(ctypes.util, "find_library", lambda name: None)
    with pytest.raises(DeviceError) as err:
        devices.import_sounddevice()
    assert "PortAudio library" in err.value.line() and "libportaudio2" in err.value.line()
    assert main(["devices"]) == 2
    err_text = capsys.readouterr().err
    assert err_text.count("\n") == 1 and "libportaudio2" in err_text and "Traceback" not in err_text


@pytest.mark.skipif(not portaudio_present(), reason="the PortAudio library (libportaudio2) is not installed")
def test_real_portaudio_null_device_is_listed(tmp_path):
    env = null_alsa_env(tmp_path)
    proc = subprocess.run([sys.executable, "-m", "showkit", "devices", "--json"], env=env,
                          capture_output=True, text=True, timeout=60)
    assert proc.returncode == 0, proc.stderr
    found = json.loads(proc.stdout)["devices"]
    assert any(d["is_default"] and d["hostapi"] == "ALSA" for d in found)
