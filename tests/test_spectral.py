"""The harmonic/percussive split's running medians (analysis/spectral.py)."""

import numpy as np
import pytest

from showkit.analysis import spectral


@pytest.mark.parametrize("shape", [(60, 80), (9, 5), (3, 4), (1, 12), (12, 1), (0, 5), (5, 0)])
@pytest.mark.parametrize("axis", [0, 1])
def test_median_network_equals_scipy_median_filter(shape, axis):
    # reference: scipy.ndimage.median_filter (mode "reflect") along one axis, to the bit; ties included
    from scipy.ndimage import median_filter

    rng = np.random.default_rng(sum(shape) + axis)
    for s in (rng.random(shape).astype(np.float32), np.round(4 * rng.random(shape)).astype(np.float32)):
        size = [1, 1]
        size[axis] = 9
        assert np.array_equal(spectral._median_filter(s, 9, axis), median_filter(s, size=tuple(size), mode="reflect"))


def test_hpss_masks_with_the_default_kernel_match_librosa():
    # Fitzgerald (DAFx 2010) as implemented by librosa.decompose.hpss(mask=True), with the scan's 9 x 9 kernel
    import librosa

    rng = np.random.default_rng(1)
    s = np.abs(rng.standard_normal((50, 70))).astype(np.float32)
    s[10, :] += 8.0  # a held tone
    s[:, 30] += 8.0  # a hit
    ours_h, ours_p = spectral.hpss_masks(s)
    ref_h, ref_p = librosa.decompose.hpss(s, kernel_size=spectral.HPSS_KERNEL[::-1], mask=True)
    assert np.allclose(ours_h, ref_h, atol=1e-5) and np.allclose(ours_p, ref_p, atol=1e-5)
    assert ours_h[10, 5] > 0.9 and ours_p[20, 30] > 0.9


def test_stft_power_is_librosas_centred_stft():
    # reference: librosa.stft(center=True, zero padding, periodic Hann) squared, on the bins kept; the
    # spectrum is taken by scipy.fft here and by librosa's own FFT there, so float32 rounding apart
    import librosa

    rng = np.random.default_rng(3)
    rate, n_fft, hop = 4800, 512, 320
    x = (0.3 * rng.standard_normal(3 * rate)).astype(np.float32)
    x += 0.5 * np.sin(2 * np.pi * 440.0 * np.arange(x.size) / rate).astype(np.float32)
    keep = spectral.band_slice(rate, n_fft, 2000.0)
    frames = spectral.frame_count(x.size, hop)
    padded = np.concatenate([np.zeros(n_fft // 2, np.float32), x, np.zeros(n_fft // 2, np.float32)])
    ours = spectral.stft_power(padded, n_fft, hop, 0, frames, keep)
    ref = np.abs(librosa.stft(x, n_fft=n_fft, hop_length=hop, center=True, pad_mode="constant")) ** 2
    assert ours.shape == (keep.stop - keep.start, frames) and ref.shape[1] == frames
    assert np.allclose(ours, ref[keep], rtol=1e-4, atol=1e-5 * float(ref.max()))
    # and a part: frames 5-9 alone are the same frames
    assert np.allclose(spectral.stft_power(padded, n_fft, hop, 5, 10, keep), ours[:, 5:10], rtol=1e-6, atol=0)


@pytest.mark.parametrize("offset", [0.0, 0.7, -0.01])
def test_windowed_spectrum_is_the_frame_less_its_weighted_mean(offset):
    # closed form: the spectrum of (x - m) w with m = sum(w x) / sum(w), by numpy's FFT on the
    # subtracted frames, equals the spectrum taken on the subtracted mean (the transform is linear)
    rng = np.random.default_rng(4)
    frames = (offset + 0.3 * rng.standard_normal((7, 512))).astype(np.float32)
    keep = slice(3, 200)
    w = spectral.hann(512).astype(float)
    m = frames.astype(float) @ w / w.sum()
    want = np.fft.rfft((frames - m[:, None]) * w, 2048, axis=1)[:, keep]
    got = spectral.windowed_spectrum(frames, 2048, keep)
    np.testing.assert_allclose(got, want, atol=2e-4 * np.abs(want).max())


def test_a_constant_has_no_spectrum_in_the_band():
    # a file of pure DC drew 4-5 notes a frame: its window's sidelobes, whitened
    frames = np.full((5, 1024), 0.7, dtype=np.float32)
    spec = spectral.windowed_spectrum(frames, 4096, slice(5, 300))
    assert np.abs(spec).max() < 1e-4 * 0.7 * 512       # against a unit sine's peak bin, ~n/4
