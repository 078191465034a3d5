"""Short-time spectrum of a track and its harmonic/percussive split.

The track is analysed at the rate of the rig's hole filters (``2.5 f_c``, a few
kHz: nothing above the plane-wave limit reaches the flames) with a hop of one
flame frame (1/30 s), so that spectrum frames and pressure frames line up.
The pitch window is about 0.4 s (a power of two), fine enough to place a tone
within a few cents of a mode.

Short-time Fourier transform with a periodic Hann window, frames centred on
``k * hop`` with the signal zero-padded at both ends (Allen & Rabiner, Proc.
IEEE 65(11), 1977; the framing of ``librosa.stft(center=True)``).

Harmonic/percussive separation by median filtering of the magnitude
spectrogram across time (sustained tones survive) and across frequency (hits
survive), then soft Wiener-type masks ``H^2 / (H^2 + P^2)``: D. Fitzgerald,
"Harmonic/percussive separation using median filtering", DAFx 2010 -- the
method of ``librosa.decompose.hpss`` (checked against it in the tests).  It
runs on a shorter window and every second frame: the split only needs to say
how much of each frame is sustained, and this keeps a long track fast.
"""

from __future__ import annotations

import numpy as np

#: Pitch window length (about), s.
WINDOW_S = 0.4
#: Separation window is this many times shorter than the pitch window.
HPSS_WINDOW_DIVISOR = 4
#: Separation frames are this many pitch frames apart.
HPSS_HOP_FACTOR = 2
#: Median-filter lengths for the separation: (bins, frames), about 80 Hz by
#: 0.6 s at a 4.8 kHz rate and 30 frames/s (project's choice).
HPSS_KERNEL = (9, 9)
#: Lowest frequency analysed, Hz (no mode of a flame tube lies below it).
LOW_HZ = 30.0
#: Frames transformed at once (memory stays bounded for long tracks).
CHUNK_FRAMES = 2048


def fft_size(rate_hz: int, window_s: float = WINDOW_S) -> int:
    """Power of two nearest ``window_s * rate_hz`` (samples)."""
    return int(2 ** round(np.log2(window_s * rate_hz)))


def hann(n: int) -> np.ndarray:
    """Periodic Hann window of ``n`` samples (as ``scipy.signal.get_window('hann', n)``)."""
    return (0.5 - 0.5 * np.cos(2.0 * np.pi * np.arange(n) / n)).astype(np.float32)


def frame_count(samples: int, hop: int) -> int:
    """Number of centred frames for ``samples`` samples at ``hop`` (``1 + samples // hop``)."""
    return 1 + int(samples) // int(hop)


def stft_power(padded: np.ndarray, n_fft: int, hop: int, first: int, last: int,
               keep: slice) -> np.ndarray:
    """``|STFT|^2`` of frames ``first`` to ``last - 1`` for the bins in ``keep``.

    Parameters
    ----------
    padded : ndarray
        Mono signal (float32, digital full scale), zero-padded ``n_fft // 2`` before so frame
        ``k`` starts at ``k * hop``.
    n_fft : int
        Window and transform length, samples.
    hop : int
        Samples between frame centres.
    first, last : int
        Frame range (``last`` at most :func:`frame_count` of the signal).
    keep : slice
        Bins kept.

    Returns
    -------
    ndarray, shape (bins, frames), float32
    """
    seg = padded[first * hop:(last - 1) * hop + n_fft]
    frames = np.lib.stride_tricks.sliding_window_view(seg, n_fft)[::hop][:last - first]
    spec = np.fft.rfft(frames * hann(n_fft)[None, :], axis=1)[:, keep]
    return (spec.real ** 2 + spec.imag ** 2).T.astype(np.float32)


def band_slice(rate_hz: int, n_fft: int, band_hz: float) -> slice:
    """Bins from :data:`LOW_HZ` up to ``band_hz`` (and Nyquist)."""
    bin_hz = rate_hz / n_fft
    lo = int(np.ceil(LOW_HZ / bin_hz))
    hi = int(np.floor(min(band_hz, rate_hz / 2.0) / bin_hz))
    return slice(lo, hi + 1)


def hpss_masks(magnitude: np.ndarray, kernel=HPSS_KERNEL, power: float = 2.0):
    """Soft harmonic and percussive masks of a magnitude spectrogram (Fitzgerald 2010).

    ``H`` = median over ``kernel[1]`` frames (across time), ``P`` = median over
    ``kernel[0]`` bins (across frequency); masks ``H^p / (H^p + P^p)`` and its
    complement, as ``librosa.decompose.hpss(mask=True, margin=1)``.

    Parameters
    ----------
    magnitude : ndarray, shape (bins, frames)
    kernel : (int, int)
        Median lengths across frequency (bins) and across time (frames).
    power : float
        Mask exponent.
    """
    from scipy.ndimage import median_filter

    s = np.asarray(magnitude, dtype=np.float32)
    harm = median_filter(s, size=(1, kernel[1]), mode="reflect")
    perc = median_filter(s, size=(kernel[0], 1), mode="reflect")
    h = harm.astype(np.float64) ** power
    p = perc.astype(np.float64) ** power
    total = h + p
    tiny = np.finfo(np.float32).tiny
    mask_h = np.where(total > tiny, h / np.where(total > tiny, total, 1.0), 0.5)
    return mask_h.astype(np.float32), (1.0 - mask_h).astype(np.float32)
