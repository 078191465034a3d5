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

from functools import lru_cache

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


@lru_cache(maxsize=8)
def _window_spectrum(n: int, n_fft: int, start: int, stop: int) -> np.ndarray:
    """The Hann window's own spectrum over bins ``start:stop`` (what a constant adds to a frame's)."""
    w = np.fft.rfft(hann(n).astype(np.float64), n_fft)[start:stop].astype(np.complex64)
    w.flags.writeable = False
    return w


def windowed_spectrum(frames: np.ndarray, n_fft: int, keep: slice) -> np.ndarray:
    """Spectrum (frames, bins in ``keep``) of each row of ``frames`` under a periodic Hann window,
    less the frame's own DC: the spectrum of the frame minus its window-weighted mean.

    A constant or a slowly drifting offset in a file drives no mode (the loudspeaker does not
    reproduce it), but its window's sidelobes reach the band's lowest bins and, whitened, read as
    notes (a file of pure DC gave 4 to 5 notes per frame).  Removing the weighted mean zeroes the
    frame's DC bin, the least-squares removal of a constant under the window; it is done on the
    spectrum (the mean times the window's spectrum), the transform being linear.
    """
    # scipy's FFT: many short transforms at once about 3x faster than numpy's on one core (measured
    # on the scan's frames, 2026-12-03); one worker, as the scan gives each file one core
    import scipy.fft as sfft

    if frames.ndim != 2 or keep.step not in (None, 1):
        raise ValueError("frames must be (frames, samples) and keep a plain slice of bins")
    n = frames.shape[1]
    window = hann(n)
    spec = sfft.rfft(frames * window[None, :], n=n_fft, axis=1, workers=1)[:, keep]
    mean = (frames @ window) / np.float32(window.sum())
    spec -= mean[:, None] * _window_spectrum(n, n_fft, keep.start, keep.stop)[None, :]
    return spec


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
    spec = windowed_spectrum(frames, n_fft, keep)
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
    # C order, as scipy's median_filter returns: the masks' layout sets the summation order of what
    # is summed from them (the sustained share, the flux)
    s = np.ascontiguousarray(magnitude, dtype=np.float32)
    harm = _median_filter(s, kernel[1], axis=1)
    perc = _median_filter(s, kernel[0], axis=0)
    h = harm.astype(np.float64) ** power
    p = perc.astype(np.float64) ** power
    total = h + p
    tiny = np.finfo(np.float32).tiny
    mask_h = np.where(total > tiny, h / np.where(total > tiny, total, 1.0), 0.5)
    return mask_h.astype(np.float32), (1.0 - mask_h).astype(np.float32)


#: Paeth's exchange network for the median of 9 (A. W. Paeth, "Median finding on a 3x3 grid",
#: Graphics Gems, 1990, in N. Devillard's "opt_med9" order): 19 compare-exchanges ``(a, b)`` putting the
#: smaller in ``p[a]``, the larger in ``p[b]``; the median ends in ``p[4]``.  The third entry says which
#: of the two results is read again (1 smaller, 2 larger, 3 both): the others are not computed.
_MEDIAN9 = ((1, 2, 3), (4, 5, 3), (7, 8, 3), (0, 1, 3), (3, 4, 3), (6, 7, 3), (1, 2, 3), (4, 5, 3), (7, 8, 3),
            (0, 3, 2), (5, 8, 1), (4, 7, 3), (3, 6, 2), (1, 4, 2), (2, 5, 1), (4, 7, 1), (4, 2, 3), (6, 4, 2),
            (4, 2, 1))


def _median_filter(s: np.ndarray, size: int, axis: int) -> np.ndarray:
    """Running median of ``size`` values along ``axis``, edges mirrored
    (``scipy.ndimage.median_filter(mode="reflect")`` along one axis, to the bit).

    For 9 values (the separation's kernel), an exchange network of elementwise
    minima and maxima over shifted views (:data:`_MEDIAN9`); other sizes use scipy.
    Written here rather than calling scipy for every size because it is about 5x
    faster on the scan's spectrograms (measured on a 4-minute track, 2026-12-02;
    the scan's hot spots are listed in ``tests/benchmarks/bench_scan.py``) and equal
    to scipy's result bit for bit (``tests/test_spectral.py``).
    """
    if size != 9:
        from scipy.ndimage import median_filter

        shape = [1, 1]
        shape[axis] = size
        return median_filter(s, size=tuple(shape), mode="reflect")
    n = s.shape[axis]
    if n == 0:
        return s.copy()
    widths = [(0, 0), (0, 0)]
    widths[axis] = (4, 4)
    padded = np.pad(s, widths, mode="symmetric")   # scipy's "reflect": d c b a | a b c d | d c b a
    p = [padded[k:k + n] if axis == 0 else padded[:, k:k + n] for k in range(9)]
    for a, b, need in _MEDIAN9:
        p[a], p[b] = (np.minimum(p[a], p[b]) if need & 1 else None), (np.maximum(p[a], p[b]) if need & 2 else None)
    return p[4]
