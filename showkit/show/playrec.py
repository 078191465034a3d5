"""Playing and recording at once through the audio device (for measuring a tube)."""

from __future__ import annotations

from showkit.errors import DeviceError


def play_record(signal, rate: int, tail_s: float = 2.0, device=None, sd=None):
    """Play ``signal`` and record one channel at once (sounddevice ``playrec``).

    Parameters
    ----------
    signal : ndarray
        Played samples, full scale = 1.
    rate : int
        Sample rate, Hz.
    tail_s : float
        Silence appended so the ring-out is recorded, s.
    device : int or str, optional
    sd : module, optional
        The sounddevice module (for tests); imported when not given.

    Raises
    ------
    DeviceError
        No PortAudio library, no device, or the device failed.
    """
    import numpy as np

    if sd is None:
        try:
            import sounddevice as sd
        except (OSError, ImportError) as exc:
            raise DeviceError(f"no audio library ({exc})", "sounddevice",
                              "install PortAudio (e.g. apt-get install libportaudio2), or record with "
                              "any recorder and use showkit measure analyse") from None
    from showkit.show.devices import choose_device

    chosen = choose_device(device, sd=sd)  # a clear message when there is no output device
    device = chosen.index if device is None else device
    out = np.concatenate([np.asarray(signal, dtype=np.float32), np.zeros(int(tail_s * rate), np.float32)])
    try:
        rec = sd.playrec(out, samplerate=rate, channels=1, device=device, blocking=True)
    except Exception as exc:  # sounddevice raises PortAudioError and ValueError for devices
        raise DeviceError(f"the audio device failed ({exc})", str(device or "default device"),
                          "check the device with showkit devices, or record with any recorder") from None
    return np.asarray(rec, dtype=float)[:, 0]
