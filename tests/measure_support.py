"""Shared helpers for the measurement tests: a synthetic tube recording, a stand-in device."""

from __future__ import annotations

import numpy as np

FS = 8000


def tube_recording(rig, speed_scale: float, f_hi_hz: float, seconds: float):
    """The sweep played through a known tube, as the cap microphone would hear it.

    The tube is :func:`showkit.analysis.tubefit.variant` of the rig's model
    (sound speed x ``speed_scale``, end correction 1.6, resistance 3e5 Pa s/m3)
    times the rig's speaker shape; 0.3 s of delay and a little noise.
    Returns ``(recording, sweep, true_model)`` at :data:`FS`.
    """
    from showkit.analysis.sweep import SweepSpec, exponential_sweep
    from showkit.analysis.tubefit import variant
    from showkit.physics.drive import driver_shape

    x = exponential_sweep(SweepSpec(30.0, f_hi_hz, seconds, FS, 0.2))
    true = variant(rig.model, speed_scale, 1.6, 3e5)
    n = x.size + 3 * FS
    nfft = 2 ** int(np.ceil(np.log2(n)))
    f = np.fft.rfftfreq(nfft, 1 / FS)
    f[0] = 1e-3
    h = true.response(f).cap_pressure * driver_shape(f, rig.drive)
    h[0] = 0
    h *= 0.5 / np.abs(h[(f > 30) & (f < f_hi_hz)]).max()
    y = np.fft.irfft(np.fft.rfft(x, nfft) * h, nfft)[:n]
    rec = np.concatenate([np.zeros(int(0.3 * FS)), y]) + \
        np.random.default_rng(0).normal(0, 1e-5, n + int(0.3 * FS))
    return rec, x, true


class OneOutputDevice:
    """A stand-in for sounddevice's device queries: one output device, as PortAudio lists it."""

    class default:
        device = (0, 0)

    def query_devices(self):
        return [{"index": 0, "name": "test out", "max_output_channels": 2, "hostapi": 0,
                 "default_samplerate": 48000.0}]

    def query_hostapis(self):
        return [{"name": "test"}]
