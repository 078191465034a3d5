"""Exponential sine sweeps: make one, and turn a recording of it into a response.

Method
------
- The sweep is Farina's exponential sine sweep (A. Farina, "Simultaneous
  measurement of impulse response and distortion with a swept-sine technique",
  AES 108th Convention, Paris, preprint 5093, 2000):
  ``x(t) = A sin(2 pi f1 L (exp(t / L) - 1))`` with ``L = T / ln(f2 / f1)``,
  faded in with a squared sine and out with a squared cosine.
- Deconvolution is regularised spectral division (O. Kirkeby & P. A. Nelson,
  "Digital filter design for inversion problems in sound reproduction",
  J. Audio Eng. Soc. 47(7/8), 583-595, 1999):
  ``H = Y conj(X) / (|X|^2 + beta(f))`` with ``beta`` small inside the sweep's
  band and large outside it, cross-faded over half an octave at each edge.
  It works from the sweep's own samples, so any sweep file will do.
- A recording made with any recorder starts at an unknown time: it is aligned
  to the sweep by cross-correlation (overlap-add, memory bounded), and the
  linear impulse response is cut out of the deconvolution.  The harmonic
  distortion products of an exponential sweep fall *before* the linear
  response (Farina 2000) and are windowed away.

Every kind of bad recording (silence, clipping, another sample rate, too
short, a recording of some other sweep) raises a
:class:`~showkit.errors.MeasureError` that says what to do.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable

import numpy as np

from showkit.analysis.audio import first_channel
from showkit.conditions import REFERENCE_LEVEL_MIN_DBFS
from showkit.errors import MeasureError
from showkit.limits import MAX_CUE_SAMPLES, MAX_RATE_HZ, MIN_RATE_HZ

#: Samples at or above this fraction of full scale count as clipped.
CLIP_LEVEL = 0.999
#: A run of this many clipped samples in a row marks a clipped recording.
CLIP_RUN = 3
#: Peak below this (dBFS) is taken as silence.
SILENCE_DBFS = -80.0
#: Below this impulse-to-noise ratio (dB) the recording does not match the sweep.
MIN_SNR_DB = 12.0
#: Below this impulse-to-noise ratio (dB) the result is flagged as noisy.
NOISY_SNR_DB = 30.0
#: Octave bands whose impulse responses peak further apart than this (s) mean
#: the recording was made with another sweep.
MAX_TIMING_SPREAD_S = 0.15
#: Time kept before the impulse-response peak, s.
PRE_WINDOW_S = 0.02
#: Longest impulse response kept after its peak, s.
MAX_IR_S = 2.0
#: Frequency resolution of the measured response, Hz (zero padding).
RESPONSE_RESOLUTION_HZ = 0.05


@dataclass(frozen=True)
class SweepSpec:
    """What a sweep is: range, length, rate, level.

    Attributes
    ----------
    f_start_hz, f_stop_hz : float
        Start and stop frequency, Hz.
    duration_s : float
        Length of the sweep, s.
    sample_rate_hz : int
        Sample rate, Hz.
    amplitude : float
        Peak amplitude, full scale = 1.
    fade_in_s, fade_out_s : float
        Lengths of the squared-sine fade-in and squared-cosine fade-out, s.
    """

    f_start_hz: float
    f_stop_hz: float
    duration_s: float
    sample_rate_hz: int
    amplitude: float = 0.1
    fade_in_s: float = 0.05
    fade_out_s: float = 0.01

    @property
    def n_samples(self) -> int:
        return int(round(self.duration_s * self.sample_rate_hz))

    @property
    def rate_l_s(self) -> float:
        """Farina's ``L = T / ln(f2 / f1)``, s."""
        return self.n_samples / self.sample_rate_hz / np.log(self.f_stop_hz / self.f_start_hz)

#: The quietest sweep showkit writes, dBFS peak: the calibration sine's floor (below it a recording
#: holds little but noise).
SWEEP_LEVEL_MIN_DBFS = REFERENCE_LEVEL_MIN_DBFS


def check_spec(spec: SweepSpec) -> None:
    """Raise :class:`MeasureError` for a sweep that cannot be made."""
    rate = spec.sample_rate_hz
    if not MIN_RATE_HZ <= rate <= MAX_RATE_HZ:
        raise MeasureError(f"sample rate {rate:g} Hz is outside {MIN_RATE_HZ} to {MAX_RATE_HZ} Hz",
                           "--rate", "use the rate of your audio interface, e.g. --rate 48000")
    for name, value in (("start", spec.f_start_hz), ("stop", spec.f_stop_hz), ("length", spec.duration_s)):
        if not math.isfinite(value):
            raise MeasureError(f"the sweep's {name} must be a finite number (got {value})", f"--{name}",
                               "give a plain number")
    if spec.duration_s * rate > MAX_CUE_SAMPLES:
        raise MeasureError(f"a sweep of {spec.duration_s:g} s at {rate:g} Hz is "
                           f"{spec.duration_s * rate:.3g} samples, more than showkit makes "
                           f"({MAX_CUE_SAMPLES:.3g})", "--length", "use --length 5 to 30 s")
    nyq = spec.sample_rate_hz / 2.0
    if not 0 < spec.f_start_hz < spec.f_stop_hz:
        raise MeasureError(f"sweep range {spec.f_start_hz:g}-{spec.f_stop_hz:g} Hz is not rising",
                           "sweep", "give --start below --stop, both above 0 Hz")
    if spec.f_stop_hz > nyq:
        raise MeasureError(f"stop frequency {spec.f_stop_hz:g} Hz is above half the sample rate",
                           "sweep", f"use --stop below {nyq:g} Hz or a higher --rate")
    if spec.f_stop_hz / spec.f_start_hz < 2.0:
        raise MeasureError("the sweep spans less than an octave", "sweep",
                           "widen --start/--stop (e.g. 20 to 2000 Hz)")
    if not 1.0 <= spec.duration_s <= 600.0:
        raise MeasureError(f"sweep length {spec.duration_s:g} s is outside 1 to 600 s", "sweep",
                           "use --length 5 to 30 s")
    if spec.fade_in_s + spec.fade_out_s >= spec.duration_s / 2:
        raise MeasureError("the fades take up half the sweep", "sweep", "use a longer sweep")
    if not 0 < spec.amplitude <= 1.0:
        raise MeasureError(f"sweep amplitude {spec.amplitude:g} is not within 0 and full scale",
                           "sweep", "give a level below 0 dBFS")


def exponential_sweep(spec: SweepSpec) -> np.ndarray:
    """Farina's exponential sweep with fades, float64, peak ``spec.amplitude``.

    Parameters
    ----------
    spec : SweepSpec
        Range (Hz), length (s), sample rate (Hz), amplitude (full scale = 1)
        and fade lengths (s).
    """
    check_spec(spec)
    n = spec.n_samples
    t = np.arange(n) / spec.sample_rate_hz
    big_l = spec.rate_l_s
    x = spec.amplitude * np.sin(2.0 * np.pi * spec.f_start_hz * big_l * (np.exp(t / big_l) - 1.0))
    n_in = int(round(spec.fade_in_s * spec.sample_rate_hz))
    n_out = int(round(spec.fade_out_s * spec.sample_rate_hz))
    if n_in > 0:
        x[:n_in] *= np.sin(np.linspace(0.0, np.pi / 2.0, n_in)) ** 2
    if n_out > 0:
        x[-n_out:] *= np.cos(np.linspace(0.0, np.pi / 2.0, n_out)) ** 2
    return x


def _next_fast(n: int) -> int:
    from scipy.fft import next_fast_len

    return int(next_fast_len(int(n), real=True))


def regularization(freq_hz: np.ndarray, band_hz: tuple[float, float], inside: float,
                   outside: float) -> np.ndarray:
    """Kirkeby-Nelson regularisation profile ``beta(f)`` (relative to ``max |X|^2``).

    ``inside`` within the band, ``outside`` beyond ``f1 / sqrt 2`` and
    ``f2 sqrt 2``, raised-cosine cross-fades (in log frequency) between.

    Parameters
    ----------
    freq_hz : ndarray
        Frequencies, Hz.
    band_hz : (float, float)
        Band edges, Hz.
    inside, outside : float
        Relative regularisation inside and outside the band.
    """
    f = np.maximum(np.asarray(freq_hz, dtype=float), 1e-9)
    f1, f2 = band_hz
    lo = np.clip(np.log(f / (f1 / np.sqrt(2.0))) / np.log(np.sqrt(2.0)), 0.0, 1.0)
    hi = np.clip(np.log(f2 * np.sqrt(2.0) / f) / np.log(np.sqrt(2.0)), 0.0, 1.0)
    w_in = np.sin(np.pi / 2.0 * lo) ** 2 * np.sin(np.pi / 2.0 * hi) ** 2
    return outside + (inside - outside) * w_in


def deconvolve(recording: np.ndarray, sweep: np.ndarray, sample_rate_hz: float,
               band_hz: tuple[float, float], n_fft: int | None = None,
               regu_inside: float = 1e-8, regu_outside: float = 1.0) -> np.ndarray:
    """Impulse response from a recording of a sweep, by regularised spectral division.

    ``H = Y conj(X) / (|X|^2 + beta(f) max|X|^2)`` (Kirkeby & Nelson 1999);
    the result is circular with length ``n_fft``: the linear response starts
    at the recording's delay, the distortion products wrap to the end.

    Parameters
    ----------
    recording, sweep : ndarray
        Recorded and played signals (full scale = 1), same sample rate.
    sample_rate_hz : float
        Sample rate, Hz.
    band_hz : (float, float)
        The sweep's band, Hz (see :func:`sweep_band`).
    n_fft : int, optional
        FFT length; default covers both signals without wrap-around of the
        linear part.
    regu_inside, regu_outside : float
        Regularisation relative to ``max |X|^2`` inside and outside the band.
    """
    y = np.asarray(recording, dtype=float)
    x = np.asarray(sweep, dtype=float)
    n = n_fft or _next_fast(max(y.size, x.size) + x.size)
    spec_x = np.fft.rfft(x, n)
    spec_y = np.fft.rfft(y, n)
    f = np.fft.rfftfreq(n, 1.0 / sample_rate_hz)
    power = np.abs(spec_x) ** 2
    beta = regularization(f, band_hz, regu_inside, regu_outside) * power.max()
    return np.fft.irfft(spec_y * np.conj(spec_x) / (power + beta), n)


def sweep_band(sweep: np.ndarray, sample_rate_hz: float) -> tuple[float, float]:
    """The band a sweep covers, Hz, read from its own spectrum.

    An exponential sweep has ``|X(f)|^2`` proportional to ``1/f`` in its band
    (Farina 2000): ``f |X|^2`` is flat there.  The band is where a
    third-octave smoothing of ``f |X|^2`` stays within 6 dB of its median
    over the strong part.

    Raises
    ------
    MeasureError
        If the file holds no sweep (no such flat region spanning an octave).
    """
    x = np.asarray(sweep, dtype=float)
    n = _next_fast(x.size)
    f = np.fft.rfftfreq(n, 1.0 / sample_rate_hz)
    w = np.abs(np.fft.rfft(x, n)) ** 2 * f
    # third-octave smoothing on a log grid
    grid = np.geomspace(max(f[1], 1.0), sample_rate_hz / 2.0, 600)
    cum = np.concatenate([[0.0], np.cumsum(w)])
    lo_idx = np.searchsorted(f, grid * 2 ** (-1 / 6))
    hi_idx = np.maximum(np.searchsorted(f, grid * 2 ** (1 / 6)), lo_idx + 1)
    smooth = (cum[np.minimum(hi_idx, w.size)] - cum[lo_idx]) / (hi_idx - lo_idx)
    strong = smooth > smooth.max() * 0.1
    if not np.any(strong):
        raise MeasureError("the sweep file holds no sound", "sweep", "make one with showkit measure sweep")
    ref = np.median(smooth[strong])
    inside = smooth > ref / 4.0
    # the longest run of in-band points
    edges = np.diff(np.concatenate([[0], inside.astype(int), [0]]))
    starts, stops = np.where(edges == 1)[0], np.where(edges == -1)[0]
    k = int(np.argmax(stops - starts))
    f1, f2 = grid[starts[k]], grid[stops[k] - 1]
    if f2 / f1 < 2.0:
        raise MeasureError("the sweep file does not hold an exponential sweep", "sweep",
                           "give the sweep file the recording was made with (showkit measure sweep)")
    return float(f1), float(f2)


def check_audio(signal: np.ndarray, where: str, role: str = "recording") -> None:
    """Raise :class:`MeasureError` for silence, clipping or non-finite samples.

    Parameters
    ----------
    signal : ndarray
        Samples, full scale = 1.
    where : str
        File name for the message.
    role : str
        ``"recording"``, ``"sweep"`` or ``"calibrator recording"``.
    """
    x = np.asarray(signal)
    if x.size == 0:
        raise MeasureError(f"the {role} is empty", where, "record again")
    if not np.all(np.isfinite(x)):
        raise MeasureError(f"the {role} holds invalid (non-finite) samples", where,
                           "export it again as a 16/24-bit or float WAV")
    peak = float(np.max(np.abs(x)))
    if peak <= 10 ** (SILENCE_DBFS / 20.0):
        raise MeasureError(f"the {role} is silent (peak {20 * np.log10(max(peak, 1e-12)):.0f} dBFS)", where,
                           "check the microphone or sensor, its input channel and the recording gain")
    hot = np.abs(x) >= CLIP_LEVEL
    if np.count_nonzero(hot) >= CLIP_RUN:
        run = _longest_run(hot)
        if run >= CLIP_RUN:
            raise MeasureError(f"the {role} is clipped ({np.count_nonzero(hot)} samples at full scale)",
                               where, "lower the recording gain (or the sweep level) and record again")


def _longest_run(mask: np.ndarray) -> int:
    edges = np.diff(np.concatenate([[0], mask.astype(np.int8), [0]]))
    starts, stops = np.where(edges == 1)[0], np.where(edges == -1)[0]
    return int(np.max(stops - starts)) if starts.size else 0


def align(recording: np.ndarray, sweep: np.ndarray) -> int:
    """Lag (samples) at which the sweep starts in the recording, by cross-correlation.

    Overlap-add correlation (scipy.signal.oaconvolve), so memory stays
    bounded by the recording length.  The peak of the correlation of the
    output with the input is the peak of the impulse response smoothed by the
    sweep's autocorrelation (Farina 2000).
    """
    from scipy.signal import oaconvolve

    xc = oaconvolve(recording, sweep[::-1], mode="full")
    # lag 0 sits at index len(sweep) - 1
    lag = int(np.argmax(np.abs(xc))) - (sweep.size - 1)
    return lag


def band_timing_spread(ir: np.ndarray, sample_rate_hz: float, band_hz: tuple[float, float],
                       peak: int) -> float:
    """Spread of the arrival times of the octave bands of a deconvolved response, s.

    With the right sweep every octave of the impulse response arrives at once
    (its envelope peaks within a few tens of ms of the others, set by the band
    filter's rise time); a recording of another sweep deconvolves into a
    smeared chirp whose octaves arrive at different times.  Envelopes are the
    magnitude of the analytic signal of each octave (one-sided spectrum).

    Parameters
    ----------
    ir : ndarray
        Circular deconvolution result.
    sample_rate_hz : float
    band_hz : (float, float)
    peak : int
        Index of the main peak.
    """
    n = ir.size
    spec = np.fft.rfft(ir)
    f = np.fft.rfftfreq(n, 1.0 / sample_rate_hz)
    # half-octave bands (one octave wide), clear of the band edges
    centres = band_hz[0] * np.sqrt(2.0) * 2.0 ** np.arange(
        0.0, np.log2(band_hz[1] / band_hz[0]) - 1.0 + 1e-9, 0.5)
    if centres.size < 2:
        return 0.0
    times = []
    full = np.zeros(n, dtype=complex)
    for fc in centres:
        u = np.log2(np.maximum(f, 1e-9) / fc)
        mask = np.where(np.abs(u) < 0.5, np.cos(np.pi * u) ** 2, 0.0)
        full[:] = 0.0
        full[: spec.size] = 2.0 * spec * mask
        env = np.abs(np.fft.ifft(full))
        lag = (int(np.argmax(env)) - peak + n // 2) % n - n // 2
        times.append(lag / sample_rate_hz)
    return float(np.max(times) - np.min(times))


@dataclass
class MeasuredResponse:
    """A recording turned into the tube's response to the sweep.

    Attributes
    ----------
    freq_hz : ndarray
        Frequencies within the sweep band, Hz (uniform grid).
    response : ndarray of complex
        Recorded signal per unit played signal (full scale per full scale),
        time zero at the impulse-response peak.
    impulse_response : ndarray
        The windowed linear impulse response (peak at ``pre_samples``).
    pre_samples : int
    sample_rate_hz : float
    delay_s : float
        Where the impulse response peaks after the recording's start, s.
    band_hz : (float, float)
    snr_db : float
        Impulse-to-noise ratio of the deconvolution, dB.
    noise : ndarray
        Expected magnitude of the noise in ``response`` at each frequency
        (from the noise after the impulse response, scaled to the window).
    warnings : list of str
    """

    freq_hz: np.ndarray
    response: np.ndarray
    impulse_response: np.ndarray
    pre_samples: int
    sample_rate_hz: float
    delay_s: float
    band_hz: tuple[float, float]
    snr_db: float
    noise: np.ndarray | None = None
    warnings: list = field(default_factory=list)


def measure_response(recording: np.ndarray, recording_rate_hz: float, sweep: np.ndarray,
                     sweep_rate_hz: float, where: str = "recording",
                     max_ir_s: float = MAX_IR_S,
                     progress: Callable[[float, str], None] | None = None) -> MeasuredResponse:
    """Check, align and deconvolve a recording of a sweep.

    Parameters
    ----------
    recording : ndarray, shape (N,) or (N, channels)
        The recording (full scale = 1); a multichannel file uses channel 0.
    recording_rate_hz, sweep_rate_hz : float
        Sample rates, Hz; they must agree.
    sweep : ndarray
        The sweep as played.
    where : str
        Name of the recording for messages.
    max_ir_s : float
        Longest impulse response kept, s.
    progress : callable(fraction, text), optional
        Called as the work proceeds (for a UI).

    Raises
    ------
    MeasureError
        Silence, clipping, another sample rate, too short, or not this sweep.
    """
    report = progress or (lambda fraction, text: None)
    y, x, fs = _checked_pair(recording, recording_rate_hz, sweep, sweep_rate_hz, where)
    report(0.1, "finding the sweep in the recording")
    band = sweep_band(x, fs)
    pre = int(round(PRE_WINDOW_S * fs))
    tail = int(round(max_ir_s * fs))
    seg, start = _sweep_segment(y, x, fs, pre, tail, where)
    report(0.3, "deconvolving")
    ir_full = deconvolve(seg, x, fs, band)
    peak = int(np.argmax(np.abs(ir_full[: pre + int(0.5 * fs)])))
    avail_tail, noise, p_head, snr_db = _noise_and_snr(ir_full, x.size, fs, band, peak, pre, tail)
    warnings = _check_match(ir_full, fs, band, peak, snr_db, where)
    report(0.6, "windowing the impulse response")
    ir, warning = _windowed_ir(ir_full, peak, pre, avail_tail, tail, p_head, snr_db)
    warnings += warning
    f, spec = _response_spectrum(ir, pre, fs)
    keep = (f >= band[0]) & (f <= band[1])
    noise_mag = noise_spectrum(noise, ir.size, fs, f[keep])
    report(1.0, "response ready")
    return MeasuredResponse(freq_hz=f[keep], response=spec[keep], impulse_response=ir,
                            pre_samples=pre, sample_rate_hz=fs, delay_s=(start + peak) / fs,
                            band_hz=band, snr_db=float(snr_db), noise=noise_mag, warnings=warnings)


def _checked_pair(recording, recording_rate_hz: float, sweep, sweep_rate_hz: float,
                  where: str) -> tuple[np.ndarray, np.ndarray, float]:
    """The recording and the sweep (mono), checked: same rate (Hz), usable audio, long enough."""
    y, x = first_channel(recording), first_channel(sweep)
    if int(round(recording_rate_hz)) != int(round(sweep_rate_hz)):
        raise MeasureError(f"recorded at {recording_rate_hz:g} Hz but the sweep is at {sweep_rate_hz:g} Hz",
                           where, f"record at {sweep_rate_hz:g} Hz, or make the sweep at "
                                  f"{recording_rate_hz:g} Hz (showkit measure sweep --rate)")
    fs = float(sweep_rate_hz)
    check_audio(x, "sweep", "sweep")
    check_audio(y, where)
    if y.size < x.size:
        raise MeasureError(f"the recording ({y.size / fs:.1f} s) is shorter than the sweep "
                           f"({x.size / fs:.1f} s)", where,
                           "record the whole sweep and a second or two of silence after it")
    return y, x, fs


def _sweep_segment(y: np.ndarray, x: np.ndarray, fs: float, pre: int, tail: int,
                   where: str) -> tuple[np.ndarray, int]:
    """The part of the recording holding the sweep (``pre`` samples before, ``tail`` after), and its start.

    The start may be negative (the recording began less than ``pre`` samples before the
    sweep): the segment is then padded with zeros in front.
    """
    lag = align(y, x)
    start = lag - pre
    if start < -pre // 2:
        raise MeasureError("the sweep is not found whole in the recording: it starts after "
                           "the sweep had begun, or it was made with another sweep", where,
                           "start recording before playing the sweep, and give the sweep file "
                           "that was played (--sweep)")
    end_needed = lag + x.size + int(round(0.2 * fs))
    if end_needed > y.size:
        raise MeasureError(f"the recording stops {(end_needed - y.size) / fs:.1f} s too early "
                           "(before the sweep and its ring-out ended)", where,
                           "keep recording for a second or two after the sweep ends")
    seg = y[max(start, 0): min(y.size, lag + x.size + tail)]
    if start < 0:
        seg = np.concatenate([np.zeros(-start), seg])
    return seg, start


def _noise_and_snr(ir_full: np.ndarray, sweep_samples: int, fs: float, band: tuple[float, float],
                   peak: int, pre: int, tail: int) -> tuple[int, np.ndarray, float, float]:
    """The tail the window can keep (samples), a stretch of noise, the peak power and the impulse-to-noise ratio (dB).

    Harmonic products of order k sit L ln k before the linear part (Farina 2000).
    Noise is estimated just before the linear part, clear of the 2nd harmonic and
    its ring-out: there the deconvolution has the recording's full overlap.
    """
    n = ir_full.size
    big_l = (sweep_samples / fs) / np.log(band[1] / band[0])
    second = int(round(big_l * np.log(2.0) * fs))
    avail_tail = min(tail, n - second - peak - pre)
    noise_far = second - min(int(0.5 * fs), int(0.4 * second))
    noise_near = pre + int(0.05 * fs)
    if noise_far - noise_near >= int(0.05 * fs):
        noise_lo, noise_hi = n + peak - noise_far, n + peak - noise_near
    else:  # a very short sweep: the end of the tail window
        noise_lo, noise_hi = peak + avail_tail // 2, peak + avail_tail
    noise = ir_full[noise_lo:noise_hi]
    head = ir_full[max(peak - pre, 0): peak + int(0.05 * fs)]
    p_head = float(np.max(head ** 2))
    p_noise = float(np.mean(noise ** 2)) if noise.size else 0.0
    snr_db = 10.0 * np.log10(p_head / p_noise) if p_noise > 0 else 200.0
    return avail_tail, noise, p_head, snr_db


def _check_match(ir_full: np.ndarray, fs: float, band: tuple[float, float], peak: int, snr_db: float,
                 where: str) -> list[str]:
    """Refuse a response drowned in noise or not made by this sweep; the warning for a noisy one."""
    if snr_db < MIN_SNR_DB:
        raise MeasureError(f"no clear response found (impulse-to-noise ratio {snr_db:.0f} dB): the "
                           "recording does not match this sweep, or the noise drowns it", where,
                           "give the sweep file that was played (--sweep), check the microphone, "
                           "and record in a quiet room")
    spread = band_timing_spread(ir_full, fs, band, peak)
    if spread > MAX_TIMING_SPREAD_S:
        raise MeasureError(f"the recording does not match this sweep (its frequencies arrive up to "
                           f"{spread:.2f} s off the sweep's timing)", where,
                           "give the sweep file that was played (--sweep): same range, length and rate")
    if snr_db < NOISY_SNR_DB:
        return [f"noisy recording: impulse-to-noise ratio {snr_db:.0f} dB (aim for 40 dB or more); "
                "Q values may be off"]
    return []


def _windowed_ir(ir_full: np.ndarray, peak: int, pre: int, avail_tail: int, tail: int, p_head: float,
                 snr_db: float) -> tuple[np.ndarray, list[str]]:
    """The linear impulse response from ``pre`` samples before its peak, faded in and out; a warning
    when it had not died away within the window."""
    n = ir_full.size
    ir = ir_full[peak - pre: peak + avail_tail].copy() if peak >= pre else np.concatenate(
        [ir_full[n - (pre - peak):], ir_full[: peak + avail_tail]])
    fade_in = np.sin(np.linspace(0.0, np.pi / 2.0, pre)) ** 2
    ir[:pre] *= fade_in
    n_fade = max(int(0.1 * avail_tail), 1)
    ir[-n_fade:] *= np.cos(np.linspace(0.0, np.pi / 2.0, n_fade)) ** 2
    # how far the tail had decayed at the window's end
    end_rms = np.sqrt(np.mean(ir[-n_fade:] ** 2)) if n_fade > 1 else 0.0
    if end_rms > np.sqrt(p_head) * 10 ** (-40 / 20) and avail_tail < tail and snr_db > 45:
        return ir, ["the response had not died away within the window: the sharpest "
                    "resonances' Q may read low; use a longer sweep"]
    return ir, []


def _response_spectrum(ir: np.ndarray, pre: int, fs: float) -> tuple[np.ndarray, np.ndarray]:
    """Frequencies (Hz) and complex response of the windowed impulse response, time zero at its peak."""
    n_resp = _next_fast(max(int(fs / RESPONSE_RESOLUTION_HZ), ir.size))
    buf = np.zeros(n_resp)
    buf[: ir.size - pre] = ir[pre:]
    buf[n_resp - pre:] = ir[:pre]
    return np.fft.rfftfreq(n_resp, 1.0 / fs), np.fft.rfft(buf)


def noise_spectrum(noise: np.ndarray, window_samples: int, sample_rate_hz: float,
                   freq_hz: np.ndarray) -> np.ndarray:
    """Expected noise magnitude in a response made from ``window_samples`` of impulse response.

    The deconvolved noise is (locally) stationary, so the noise power in a
    window of ``W`` samples is ``W / N`` times that in a stretch of ``N``
    samples; smoothed over a sixth of an octave.

    Parameters
    ----------
    noise : ndarray
        A stretch of the deconvolution holding noise only.
    window_samples : int
        Length of the impulse-response window, samples.
    sample_rate_hz : float
    freq_hz : ndarray
        Frequencies wanted, Hz.
    """
    if noise.size < 16:
        return np.zeros_like(freq_hz)
    spec = np.abs(np.fft.rfft(noise * np.hanning(noise.size))) ** 2 / np.mean(np.hanning(noise.size) ** 2)
    fn = np.fft.rfftfreq(noise.size, 1.0 / sample_rate_hz)
    cum = np.concatenate([[0.0], np.cumsum(spec)])
    lo = np.searchsorted(fn, freq_hz * 2 ** (-1 / 12))
    hi = np.maximum(np.searchsorted(fn, freq_hz * 2 ** (1 / 12)), lo + 1)
    hi = np.minimum(hi, spec.size)
    lo = np.minimum(lo, hi - 1)
    mean_power = (cum[hi] - cum[lo]) / (hi - lo)
    return np.sqrt(mean_power * window_samples / noise.size)
