"""A stand-in for the sounddevice module, for tests that need a device without PortAudio.

It has what showkit.show.devices and the engine use: ``query_devices``,
``query_hostapis``, ``default.device``, ``check_output_settings``,
``OutputStream`` and ``PortAudioError``.  Its stream either runs the callback
in a thread (a device that pulls blocks as fast as it can, like ALSA's null
PCM) or is pumped by hand with :meth:`FakeStream.pump`.
"""

from __future__ import annotations

import threading
import time
from types import SimpleNamespace

import numpy as np


class PortAudioError(Exception):
    pass


class Flags:
    def __init__(self, output_underflow=False):
        self.output_underflow = output_underflow

    def __bool__(self):
        return bool(self.output_underflow)


class FakeStream:
    def __init__(self, sd, *, device, samplerate, channels, dtype, blocksize, latency,
                 callback, finished_callback):
        self.sd = sd
        self.device = device
        self.samplerate = samplerate
        self.channels = channels
        self.blocksize = blocksize or 512
        self.callback = callback
        self.finished_callback = finished_callback
        self.active = False
        self.closed = False
        self._thread = None
        self._stop = threading.Event()
        sd.streams.append(self)

    def start(self):
        if self.sd.fail_start:
            raise PortAudioError("Error opening OutputStream: Device unavailable [PaErrorCode -9985]")
        self.active = True
        if self.sd.threaded:
            self._thread = threading.Thread(target=self._run, daemon=True)
            self._thread.start()

    def _run(self):
        period = self.blocksize / self.samplerate
        next_t = time.monotonic()
        while not self._stop.is_set():
            self.pump(1)
            if self.sd.pace:  # like a real device: one block per block of time
                next_t += period
                time.sleep(max(0.0, next_t - time.monotonic()))
            else:
                time.sleep(0.0005)

    def pump(self, blocks, status=None):
        out = np.zeros((self.blocksize, self.channels), np.float32)
        for _ in range(blocks):
            out.fill(np.nan)  # a callback that leaves samples unwritten shows up as NaN
            self.callback(out, self.blocksize, None, status or Flags())
            self.sd.played.append(out[:, 0].copy())

    def lose_device(self):
        """The device goes away: the stream ends by itself."""
        self._stop.set()
        self.active = False
        self.finished_callback()

    def abort(self):
        self._stop.set()
        if self._thread is not None and self._thread is not threading.current_thread():
            self._thread.join(1.0)
        self.active = False

    stop = abort

    def close(self):
        self.abort()
        self.closed = True


def make_sd(devices=None, rates=None, threaded=False, fail_start=False, default_out=0):
    """A fake sounddevice module.

    devices : list of (name, max_output_channels, default_samplerate, max_input_channels)
    rates : dict device index -> set of accepted rates (default: every rate)
    """
    if devices is None:
        devices = [("Mic only", 0, 48000.0, 2), ("Desk Speakers", 2, 48000.0, 0)]
        default_out = 1
    infos = [{"index": k, "name": n, "max_output_channels": ch, "default_samplerate": rate,
              "max_input_channels": inp, "hostapi": 0}
             for k, (n, ch, rate, inp) in enumerate(devices)]
    sd = SimpleNamespace(PortAudioError=PortAudioError, streams=[], played=[],
                         threaded=threaded, fail_start=fail_start, pace=False,
                         default=SimpleNamespace(device=[-1, default_out]))
    sd.query_devices = lambda: list(infos)
    sd.query_hostapis = lambda: [{"name": "FakeAPI"}]

    def check_output_settings(device, samplerate, channels, dtype):
        if rates is not None and samplerate not in rates.get(device, set()):
            raise PortAudioError(f"Invalid sample rate {samplerate}")

    sd.check_output_settings = check_output_settings
    sd.OutputStream = lambda **kw: FakeStream(sd, **kw)
    return sd
