"""Audio output devices: list them, choose one, agree a sample rate.

Everything goes through the sounddevice package (Python bindings to the
PortAudio library), imported only when a device is needed.  When the PortAudio
library is missing, sounddevice's import raises ``OSError``; that and a machine
with no output device become a :class:`~showkit.errors.DeviceError` that says
what to install or connect.
"""

from __future__ import annotations

import importlib
from dataclasses import asdict, dataclass

from showkit.errors import DeviceError

INSTALL_FIX = ("install the PortAudio library (Debian/Ubuntu: `sudo apt-get install libportaudio2`; "
               "Fedora: `sudo dnf install portaudio`; macOS: `brew install portaudio`), then try again")


@dataclass(frozen=True)
class OutputDevice:
    """One audio output device as PortAudio sees it.

    Parameters
    ----------
    index : int
        PortAudio's device index (what ``--device INDEX`` takes).
    name : str
        The device name.
    channels : int
        Maximum output channels.
    default_rate_hz : float
        The device's default sample rate in Hz.
    hostapi : str
        The host audio system (ALSA, Core Audio, WASAPI, ...).
    is_default : bool
        True for the system's default output device.
    """

    index: int
    name: str
    channels: int
    default_rate_hz: float
    hostapi: str
    is_default: bool

    def as_dict(self) -> dict:
        return asdict(self)


def import_sounddevice():
    """The sounddevice module, or a DeviceError saying how to get PortAudio."""
    try:
        return importlib.import_module("sounddevice")
    except OSError as exc:
        raise DeviceError(f"the PortAudio library cannot be loaded ({exc})", "audio",
                          INSTALL_FIX) from None
    except ImportError as exc:
        raise DeviceError(f"the sounddevice package is missing ({exc})", "audio",
                          "reinstall showkit: `pip install .` pulls in sounddevice") from None


def _default_output_index(sd) -> int | None:
    try:
        index = int(sd.default.device[1])
    except (TypeError, ValueError, IndexError):
        return None
    return index if index >= 0 else None


def list_output_devices(sd=None) -> list[OutputDevice]:
    """Every device with at least one output channel, in PortAudio's order."""
    sd = sd or import_sounddevice()
    try:
        infos = sd.query_devices()
        hostapis = sd.query_hostapis()
    except Exception as exc:  # PortAudio errors from a broken audio system
        raise DeviceError(f"cannot ask PortAudio for the devices ({exc})", "audio",
                          "check that the sound system is running, then try again") from None
    default = _default_output_index(sd)
    found = []
    for info in infos:
        channels = int(info.get("max_output_channels", 0))
        if channels < 1:
            continue
        index = int(info["index"])
        api = info.get("hostapi", 0)
        api_name = hostapis[api]["name"] if 0 <= api < len(hostapis) else "?"
        found.append(OutputDevice(index=index, name=str(info["name"]), channels=channels,
                                  default_rate_hz=float(info.get("default_samplerate", 0.0)),
                                  hostapi=str(api_name), is_default=index == default))
    return found


def choose_device(spec: str | int | None = None, sd=None) -> OutputDevice:
    """The output device named by ``spec``.

    Parameters
    ----------
    spec : str, int or None
        None: the system default (or the first output device).  A whole number
        (or text of digits): that device index.  Other text: the one device whose
        name holds it (case-insensitive; an exact name wins over a partial one).
    """
    devices = list_output_devices(sd)
    if not devices:
        raise DeviceError("no audio output device was found", "audio",
                          "connect or switch on an audio interface (or check the sound "
                          "settings), then run `showkit devices`")
    if spec is None or (isinstance(spec, str) and not spec.strip()):
        for dev in devices:
            if dev.is_default:
                return dev
        return devices[0]
    text = str(spec).strip()
    if isinstance(spec, int) or text.isdigit():
        index = int(text)
        for dev in devices:
            if dev.index == index:
                return dev
        raise DeviceError(f"there is no output device with index {index}", "--device",
                          "run `showkit devices` to see the indexes")
    exact = [d for d in devices if d.name.lower() == text.lower()]
    if len(exact) == 1:
        return exact[0]
    matches = [d for d in devices if text.lower() in d.name.lower()]
    if len(matches) == 1:
        return matches[0]
    if not matches:
        raise DeviceError(f"no output device name holds {text!r}", "--device",
                          "run `showkit devices` and give part of a name or an index")
    names = "; ".join(f"{d.index}: {d.name}" for d in matches)
    raise DeviceError(f"{text!r} matches {len(matches)} devices ({names})", "--device",
                      "give a longer part of the name, or the index")


def negotiate_rate(device: OutputDevice, wanted_hz: int, sd=None, channels: int = 1) -> int:
    """The sample rate (Hz) to open ``device`` at: ``wanted_hz`` if it takes it, else its default.

    Raises DeviceError when the device takes neither.
    """
    sd = sd or import_sounddevice()
    tried = []
    for rate in (int(wanted_hz), int(round(device.default_rate_hz))):
        if rate <= 0 or rate in tried:
            continue
        tried.append(rate)
        try:
            sd.check_output_settings(device=device.index, samplerate=rate, channels=channels,
                                     dtype="float32")
            return rate
        except Exception:  # sounddevice raises PortAudioError or ValueError here
            continue
    raise DeviceError(f"device {device.index} ({device.name}) takes none of the rates "
                      f"{', '.join(f'{r} Hz' for r in tried)} for mono float output", "--device",
                      "choose another device (`showkit devices`)")
