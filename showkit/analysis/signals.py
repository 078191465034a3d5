"""Generated signals: tones, glides and raised-cosine fades (numbers, no I/O).

Tones and glides have a peak of 1.0 (0 dBFS) before any gain.  A glide sweeps
exponentially in frequency, ``f(t) = f1 (f2 / f1)^(t / T)``, with the phase its
integral, ``2 pi f1 T (exp(t ln(f2/f1) / T) - 1) / ln(f2/f1)`` (the exponential
sweep of Farina, AES preprint 5093, 2000).  Fades are raised-cosine (half-Hann)
ramps.  The cues' tones and glides (:mod:`showkit.show.sources`) and the
calibration sine (:func:`showkit.analysis.measurement.reference_sine`) are made here.
"""

from __future__ import annotations

import numpy as np

from showkit.errors import SheetError

#: Rate of generated cues (tones, glides, pauses), Hz.
TONE_RATE_HZ = 48000


def fade(samples: np.ndarray, rate_hz: int, fade_in_s: float, fade_out_s: float,
         where: str = "cue") -> np.ndarray:
    """Apply raised-cosine fade-in and fade-out ramps (returns a new array).

    Parameters
    ----------
    samples : numpy.ndarray
        Mono samples (full scale 1.0).
    rate_hz : int
        Their sample rate, Hz.
    fade_in_s, fade_out_s : float
        Ramp lengths, s; together at most the signal's length (else a SheetError naming ``where``).
    """
    n = samples.size
    if not (fade_in_s + fade_out_s <= (n + 1) / rate_hz):  # in seconds first: a huge fade is no int
        raise SheetError(f"fades ({fade_in_s:g} s + {fade_out_s:g} s) are longer than the cue "
                         f"({n / rate_hz:.2f} s)", where, "shorten the fades or lengthen the cue")
    a, b = int(round(fade_in_s * rate_hz)), int(round(fade_out_s * rate_hz))
    if a + b > n:
        raise SheetError(f"fades ({fade_in_s:g} s + {fade_out_s:g} s) are longer than the cue "
                         f"({n / rate_hz:.2f} s)", where, "shorten the fades or lengthen the cue")
    out = np.array(samples, dtype=float, copy=True)
    if a:
        out[:a] *= 0.5 * (1.0 - np.cos(np.pi * (np.arange(a) + 0.5) / a))
    if b:
        out[n - b:] *= 0.5 * (1.0 + np.cos(np.pi * (np.arange(b) + 0.5) / b))
    return out


def tone(freq_hz: float, duration_s: float, rate_hz: int = TONE_RATE_HZ) -> np.ndarray:
    """A sine of peak 1.0 at ``freq_hz`` (Hz) for ``duration_s`` (s) at ``rate_hz`` (Hz)."""
    t = np.arange(int(round(duration_s * rate_hz))) / rate_hz
    return np.sin(2.0 * np.pi * freq_hz * t)


def glide(f1_hz: float, f2_hz: float, duration_s: float, rate_hz: int = TONE_RATE_HZ) -> np.ndarray:
    """A sine whose frequency moves exponentially from ``f1_hz`` to ``f2_hz`` (Hz) in ``duration_s`` (s)."""
    n = int(round(duration_s * rate_hz))
    t = np.arange(n) / rate_hz
    if abs(f2_hz - f1_hz) < 1e-9 * f1_hz:
        return np.sin(2.0 * np.pi * f1_hz * t)
    ratio = np.log(f2_hz / f1_hz)
    phase = 2.0 * np.pi * f1_hz * duration_s * (np.exp(t * ratio / duration_s) - 1.0) / ratio
    return np.sin(phase)
