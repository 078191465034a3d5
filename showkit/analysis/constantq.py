"""Constant-Q magnitude spectrogram, computed octave by octave (numpy, scipy.fft, soxr).

The method is the multirate constant-Q transform: each octave's filters are
applied as a spectral kernel to a short-time Fourier transform (J. C. Brown and
M. S. Puckette, "An efficient algorithm for the calculation of a constant Q
transform", JASA 92(5), 1992), and the signal is halved in rate before the next
octave down, so every octave uses the same short transform (C. Schörkhuber and
A. Klapuri, "Constant-Q transform toolbox for music processing", SMC 2010).
The filters are Hann-windowed complex exponentials whose length is Q periods,
Q = 1 / alpha with alpha = (2^(2/B) - 1) / (2^(2/B) + 1) for B bins per octave
(each filter's bandwidth reaching its neighbours' centres), normalised to unit
L1 norm, and each bin's output is divided by the square root of its filter
length: the conventions of librosa's ``vqt`` with ``gamma=0`` and ``tuning=0``
(B. McFee et al., librosa 0.11), which the top-line network was trained on.
``tests/test_constantq.py`` checks the two agree bin for bin.

Why not call librosa here: importing its constant-Q module costs about 210 MB
of resident memory (numba and the libraries behind it, read from
``/proc/self/status``) and 2.5-3 s, for one transform of a hundred lines; with
it the hour-long map peaked at 543 MB, 367 MB without (DEVELOPERS.md Methods
§8b).  The transform is the same few matrix products either way (this one
about 3 times faster on a 36-s piece, measured; it keeps its filters between calls).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

#: Quantile of each filter's spectral magnitude dropped from its kernel (the
#: smallest coefficients whose sum is under this share of the row's sum), as
#: librosa's ``sparsity`` default.
KERNEL_SPARSITY = 0.01
#: Equivalent noise bandwidth of the Hann window, bins (F. J. Harris, Proc. IEEE 66(1), 1978, Table 1).
HANN_ENBW_BINS = 1.5


def bin_frequencies(fmin_hz: float, n_bins: int, bins_per_octave: int) -> np.ndarray:
    """Centre frequency of each bin, Hz: ``fmin_hz * 2**(k / bins_per_octave)``."""
    return fmin_hz * 2.0 ** (np.arange(n_bins) / bins_per_octave)


def relative_bandwidth(bins_per_octave: int) -> float:
    """alpha: each filter's bandwidth over its centre frequency, so that neighbouring bands meet."""
    r = 2.0 ** (2.0 / bins_per_octave)
    return (r - 1.0) / (r + 1.0)


def filter_lengths(freqs_hz: np.ndarray, rate_hz: float, bins_per_octave: int) -> np.ndarray:
    """Length of each bin's filter, samples (fractional): Q periods of its centre frequency."""
    return rate_hz / (relative_bandwidth(bins_per_octave) * np.asarray(freqs_hz, dtype=float))


@lru_cache(maxsize=32)
def _octave_kernel(rate_hz: float, freqs: tuple, bins_per_octave: int, gain: float) -> tuple[np.ndarray, int]:
    """One octave's spectral kernel (bins, n_fft // 2 + 1), complex64, and its transform length."""
    f = np.asarray(freqs)
    lengths = filter_lengths(f, rate_hz, bins_per_octave)
    n_fft = int(2.0 ** np.ceil(np.log2(lengths.max())))
    # single precision from the filters on, as librosa builds them: the kernel's smallest
    # coefficients sit at the sparsity cut, and which of them survive decides the leakage read
    # at -60 dB in a quiet frame (double-precision filters moved such bins by up to 0.3 dB)
    basis = np.zeros((f.size, n_fft), dtype=np.complex64)
    for i, (ilen, fk) in enumerate(zip(lengths, f)):
        t = np.arange(-ilen // 2, ilen // 2, dtype=float)
        w = 0.5 - 0.5 * np.cos(2.0 * np.pi * np.arange(t.size) / t.size)     # periodic Hann
        sig = np.exp(2j * np.pi * fk / rate_hz * t) * w
        sig /= np.abs(sig).sum()
        left = (n_fft - sig.size) // 2
        basis[i, left:left + sig.size] = sig
    basis *= (lengths / n_fft)[:, None]
    kern = np.fft.fft(basis, n=n_fft, axis=1)[:, :n_fft // 2 + 1]
    mags = np.abs(kern)
    ordered = np.sort(mags, axis=1)
    cum = np.cumsum(ordered / mags.sum(axis=1, keepdims=True), axis=1)
    cut = ordered[np.arange(f.size), np.argmin(cum < KERNEL_SPARSITY, axis=1)]
    kern[mags < cut[:, None]] = 0.0
    kern *= gain
    kern = kern.astype(np.complex64)
    kern.flags.writeable = False
    return kern, n_fft


def _frames_spectrum(x: np.ndarray, n_fft: int, hop: int) -> np.ndarray:
    """Short-time spectrum (n_fft // 2 + 1, frames), rectangular window, frames centred on
    multiples of ``hop`` (zeros padded either side)."""
    import scipy.fft as sfft   # many short transforms: faster than numpy's (0.03 s against 0.08 s for 36 s)

    half = n_fft // 2
    xp = np.concatenate([np.zeros(half, np.float32), x, np.zeros(half, np.float32)])
    frames = np.lib.stride_tricks.sliding_window_view(xp, n_fft)[::hop]
    return sfft.rfft(frames, axis=1).T


def _halve_rate(x: np.ndarray) -> np.ndarray:
    """The signal at half the rate (soxr, high quality), amplitude scaled by sqrt 2 as the filters expect.

    Scaled as librosa does it, dividing by sqrt(0.5) in place: multiplying by a rounded sqrt 2
    instead changed the float32 rounding enough to move the -60 dB bins of quiet frames by up to
    0.46 dB against librosa (``tests/test_constantq.py``)."""
    import soxr

    n = -(-x.size // 2)
    y = soxr.resample(x, 2, 1, quality="HQ")
    y = y[:n] if y.size >= n else np.concatenate([y, np.zeros(n - y.size, dtype=y.dtype)])
    y /= np.sqrt(0.5)
    return y


def cqt_magnitude(samples: np.ndarray, rate_hz: float, hop: int, fmin_hz: float, n_bins: int,
                  bins_per_octave: int) -> np.ndarray:
    """Constant-Q magnitude (frames, n_bins), float32, frame ``k`` centred on sample ``k * hop``.

    Parameters
    ----------
    samples : mono signal, float.
    rate_hz : its sample rate, Hz.
    hop : samples between frames; a power of two at least ``2**(octaves - 1)``, so that every
        octave's halved rate keeps a whole hop.
    fmin_hz : centre frequency of the lowest bin, Hz.
    n_bins : number of bins; the highest filter must stay below the Nyquist frequency and reach
        above a quarter of the sample rate (where librosa lowers the rate first, which is not
        done here).
    bins_per_octave : bins per octave.
    """
    x = np.asarray(samples, dtype=np.float32)
    freqs = bin_frequencies(fmin_hz, n_bins, bins_per_octave)
    octaves = -(-n_bins // bins_per_octave)
    if hop & (hop - 1) or hop < 2 ** (octaves - 1):
        raise ValueError(f"hop {hop} must be a power of two of at least {2 ** (octaves - 1)}")
    q = 1.0 / relative_bandwidth(bins_per_octave)
    cutoff_hz = freqs[-1] * (1.0 + 0.5 * HANN_ENBW_BINS / q)
    if cutoff_hz > rate_hz / 2.0:
        raise ValueError("the highest constant-Q filter reaches the Nyquist frequency")
    if np.ceil(np.log2(rate_hz / 2.0 / cutoff_hz)) - 2 > 0:
        # librosa would first lower the rate (its "early downsampling"); not done here, so the
        # agreement tested for the top line's settings would not hold (individual bins differed
        # by up to 37 dB on a noisy tone at 216 bins): refused rather than untested
        raise ValueError("the highest constant-Q filter is below a quarter of the sample rate: "
                         "resample the signal lower first")
    out = []
    my_x, my_rate, my_hop = x, float(rate_hz), hop
    for i in range(octaves):
        hi = n_bins - i * bins_per_octave
        lo = max(hi - bins_per_octave, 0)
        kern, n_fft = _octave_kernel(my_rate, tuple(freqs[lo:hi]), bins_per_octave,
                                     float(np.sqrt(rate_hz / my_rate)))
        out.append((lo, np.abs(kern @ _frames_spectrum(my_x, n_fft, my_hop))))
        if i < octaves - 1:
            my_x, my_rate, my_hop = _halve_rate(my_x), my_rate / 2.0, my_hop // 2
    frames = min(o.shape[1] for _, o in out)
    mag = np.empty((frames, n_bins), dtype=np.float32)
    for lo, o in out:
        mag[:, lo:lo + o.shape[0]] = o[:, :frames].T
    mag /= np.sqrt(filter_lengths(freqs, rate_hz, bins_per_octave)).astype(np.float32)
    return mag
