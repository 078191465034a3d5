"""Test signals shared by the ceiling tests (numpy only)."""

from __future__ import annotations

import numpy as np


def faded_sine(freq_hz: float, amplitude: float, seconds: float, rate: int, fade_s: float = 0.5) -> np.ndarray:
    """A sine of ``amplitude`` (full scale) at ``freq_hz`` (Hz), ``seconds`` long at ``rate`` (Hz),
    with raised-cosine fades of ``fade_s`` (s) at both ends."""
    t = np.arange(int(round(seconds * rate))) / rate
    x = amplitude * np.sin(2 * np.pi * freq_hz * t)
    n = int(fade_s * rate)
    ramp = 0.5 * (1 - np.cos(np.pi * np.arange(n) / n))
    x[:n] *= ramp
    x[-n:] *= ramp[::-1]
    return x
