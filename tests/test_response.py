"""Pressure at every hole over time (DEVELOPERS.md Methods §5 and §7): filters, simulate, pressure_signal."""

from __future__ import annotations

import math

import numpy as np
import pytest
import scipy.signal

from showkit.analysis.pressure import hole_filters
from showkit.physics.flames import frame_flames
from showkit.physics.modes import find_modes
from showkit.physics.response import analysis_rate_hz, envelope_range, pressure_signal, simulate, transfer
from showkit.rigfile import load_rig


@pytest.fixture(scope="module")
def rig():
    return load_rig(None)


@pytest.fixture(scope="module")
def filters(rig):
    return hole_filters(rig)


def _faded_sine(freq_hz, amplitude, seconds, rate, fade_s=0.5, phase=0.0):
    t = np.arange(int(round(seconds * rate))) / rate
    x = amplitude * np.sin(2 * np.pi * freq_hz * t + phase)
    n = int(fade_s * rate)
    x[:n] *= 0.5 * (1 - np.cos(np.pi * np.arange(n) / n))  # raised-cosine fade-in
    return x


def test_analysis_rate_rule():
    # 2.5 f_c rounded up to a multiple of 300 Hz (whole samples per 1/30 s frame)
    for f_c in (100.0, 1814.62, 1800.0, 1920.0, 4000.0):
        fs = analysis_rate_hz(f_c)
        assert fs % 300 == 0 and fs >= 2.5 * f_c and fs - 300 < 2.5 * f_c


def test_filters_of_the_demo_rig(rig, filters):
    assert filters.rate_hz == analysis_rate_hz(rig.model.plane_wave_limit_hz)
    assert filters.holes == rig.geometry.hole_count
    assert filters.delay == round(0.02 * filters.rate_hz)
    assert filters.rate_hz % 30 == 0 and filters.frame_samples * 30 == filters.rate_hz
    assert filters.band_hz < filters.rate_hz / 2  # the taper ends below Nyquist
    assert "1439.3 Hz" in filters.drive_text and "mass-controlled" in filters.drive_text


def test_transfer_calibration_point_and_no_dc(rig):
    d = rig.drive
    g, cap = transfer(rig.model, d, [0.0, d.reference_frequency_hz])
    # the calibration point (DEVELOPERS.md Methods §5): P_ref at the cap for 10^(L/20) full scale
    assert abs(cap[1]) * 10 ** (d.reference_level_dbfs / 20) == pytest.approx(d.reference_pressure_pa,
                                                                               rel=1e-12)
    # the drive model (band-pass) and the tube have no response at DC
    assert cap[0] == 0 and np.all(g[:, 0] == 0)


def test_impulse_responses_reproduce_the_transfer_function(rig, filters):
    # the designed FIR (undone delay) has the spectrum G_i(f) (IR truncated at 1e-4)
    n = 1 << 16
    freq = np.fft.rfftfreq(n, 1.0 / filters.rate_hz)
    pick = (freq > 60) & (freq < 0.9 * rig.model.plane_wave_limit_hz)
    spec = np.fft.rfft(filters.impulse[::9], n=n, axis=1) * np.exp(
        2j * np.pi * freq * filters.delay / filters.rate_hz)
    g, _ = transfer(rig.model, rig.drive, freq[pick])
    err = np.abs(spec[:, pick] - g[::9])
    assert err.max() < 2e-3 * np.abs(g).max()


@pytest.mark.parametrize("mode_n", [2, 5])
def test_steady_sine_at_a_mode_matches_the_frequency_response(rig, filters, mode_n):
    mode = next(m for m in find_modes(rig.model) if m.n == mode_n)
    fs = filters.rate_hz
    amp = 0.05
    x = _faded_sine(mode.frequency_hz, amp, 5.0, fs)
    p = pressure_signal(filters, x)
    g, _ = transfer(rig.model, rig.drive, [mode.frequency_hz])
    g = g[:, 0]
    # steady state: from 3.5 s (fade 0.5 s + a ring-up well past the IR's decay) to 4.8 s
    idx = np.arange(int(3.5 * fs), int(4.8 * fs))
    t = (idx - filters.delay) / fs
    # the sine's analytic form through G: amp * G * exp(j(w t - pi/2)) (frequency response)
    expected = amp * g[:, None] * np.exp(1j * (2 * np.pi * mode.frequency_hz * t[None, :] - np.pi / 2))
    err = np.abs(p[:, idx] - expected)
    assert err.max() < 2e-3 * np.abs(expected).max()
    # simulate() in blocks: the per-frame envelope is the steady amplitude at every hole
    res = simulate(filters, [x[:7000], x[7000:]])
    frames = slice(int(3.6 * 30), int(4.7 * 30))
    steady = res.envelope[frames]
    assert steady.shape[0] > 30
    np.testing.assert_allclose(steady, np.broadcast_to(amp * np.abs(g), steady.shape), rtol=2e-3)


def test_tone_burst_against_direct_convolution(filters):
    fs = filters.rate_hz
    n = int(0.12 * fs)
    burst = 0.3 * np.hanning(n) * np.sin(2 * np.pi * 310.0 * np.arange(n) / fs)
    p = pressure_signal(filters, burst)
    assert p.shape == (filters.holes, n + filters.taps - 1)
    # direct convolution with every impulse response (scipy.signal.fftconvolve; numpy.convolve)
    direct = scipy.signal.fftconvolve(burst[None, :], filters.impulse, axes=1)
    scale = np.abs(direct).max()
    assert np.abs(p.real - direct).max() < 1e-9 * scale
    assert np.abs(p.real[17] - np.convolve(burst, filters.impulse[17])).max() < 1e-9 * scale
    # imaginary part: the Hilbert transform of the real part (scipy.signal.hilbert, same length)
    m = 1 << int(math.ceil(math.log2(p.shape[1])))
    hil = scipy.signal.hilbert(direct, N=m, axis=1)[:, :p.shape[1]]
    assert np.abs(p - hil).max() < 1e-9 * scale


def test_simulate_in_blocks_matches_the_whole_signal(filters):
    """Overlap-add in uneven blocks, single precision, against direct whole-signal convolution."""
    fs = filters.rate_hz
    rng = np.random.default_rng(11)
    x = 0.05 * rng.standard_normal(int(14.3 * fs))
    x[int(6 * fs):int(6 * fs) + 40] += 0.7  # a click
    cuts = np.sort(rng.integers(0, x.size, 6))
    blocks = np.split(x, cuts)
    res = simulate(filters, iter(blocks), static_pa=20.0, gain=2.0)
    p = pressure_signal(filters, x)
    frame = filters.frame_samples
    frames = res.envelope.shape[0]
    assert frames == math.ceil((x.size + filters.taps) / frame)
    padded = np.zeros((filters.holes, frames * frame), dtype=complex)
    padded[:, :p.shape[1]] = p
    env = np.abs(padded).reshape(filters.holes, frames, frame).max(axis=2).T
    scale = env.max()
    # the Hilbert part of a block's output is not time-limited: its wrapped-around share
    # makes the envelope differ by a few 1e-4 at block ends; elsewhere float32 rounding
    assert np.abs(res.envelope - env).max() < 1e-3 * scale
    assert np.median(np.abs(res.envelope - env)) < 1e-6 * scale
    # the real part is exact, so the envelope bounds the sampled |p| in every frame
    real = np.abs(padded.real).reshape(filters.holes, frames, frame).max(axis=2).T
    assert np.all(res.envelope >= real - 1e-5 * scale)
    k = int(np.argmax(np.abs(p)))
    hole, sample = divmod(k, p.shape[1])
    assert res.worst_hole == hole
    assert res.worst_pa == pytest.approx(np.abs(p).max(), rel=1e-5)
    assert res.worst_time_s == pytest.approx((sample - filters.delay) / fs, abs=1.5 / fs)
    h, a = frame_flames(padded.real, 20.0, frame, gain=2.0)
    assert np.abs(res.height - h).max() < 1e-5
    np.testing.assert_array_equal(res.air_in, a)
    # a flames-only pass and another thread count give the same flames
    again = simulate(filters, x, static_pa=20.0, gain=2.0, envelope=False, workers=1)
    assert again.envelope is None
    assert np.abs(again.height - res.height).max() < 1e-5
    np.testing.assert_array_equal(again.air_in, res.air_in)
    one = simulate(filters, x, workers=1)
    np.testing.assert_array_equal(one.envelope, simulate(filters, x, workers=3).envelope)


def test_envelope_range_is_the_exact_envelope_at_every_second_sample(filters):
    """The scan's envelope (every second sample of p + j H{p}) against direct convolution.

    Reference: the whole-signal analytic pressure (pressure_signal, checked against
    scipy.signal.fftconvolve and scipy.signal.hilbert above), its even samples only.
    """
    fs = filters.rate_hz
    rng = np.random.default_rng(5)
    x = (0.05 * rng.standard_normal(int(9.1 * fs))).astype(np.float32)  # float32, as the scan decodes
    x[int(4 * fs):int(4 * fs) + 40] += 0.7
    got = envelope_range(filters, x, workers=1)
    p = pressure_signal(filters, x.astype(float))
    frame = filters.frame_samples
    frames = math.ceil((x.size + filters.taps) / frame)
    assert got.shape == (frames, 2) and got.dtype == np.float32
    padded = np.zeros((filters.holes, frames * frame), dtype=complex)
    padded[:, :p.shape[1]] = p
    even = np.abs(padded[:, ::2]).reshape(filters.holes, frames, frame // 2).max(axis=2)
    scale = even.max()
    want = np.stack([even.min(axis=0), even.max(axis=0)], axis=1)
    assert np.abs(got - want).max() < 1e-3 * scale  # block-end wrap of the Hilbert part, as above
    assert np.median(np.abs(got - want)) < 1e-6 * scale
    # against every sample (simulate): never above it, and the largest swing within 0.5 dB
    full = simulate(filters, x, workers=1).envelope
    assert np.all(got[:, 1] <= full.max(axis=1) + 1e-3 * scale)
    assert 20 * np.log10(full.max() / got[:, 1].max()) < 0.5
    assert np.array_equal(got, envelope_range(filters, x, workers=3))  # threads change nothing
    assert envelope_range(filters, x, ring_out=False).shape[0] == x.size // frame + (x.size % frame > 0)


def test_simulate_without_ring_out_stops_with_the_signal(filters):
    x = np.zeros(filters.frame_samples * 10)
    x[5] = 0.5
    res = simulate(filters, x, ring_out=False)
    assert res.envelope.shape[0] == 10
    assert simulate(filters, x).envelope.shape[0] > 10


def test_no_missed_crest_between_samples(rig, filters):
    """A tone at fs/4 whose crest at the worst hole falls half-way between samples.

    Reference: the pressure evaluated analytically from the transfer function on a
    16x oversampled grid (DEVELOPERS.md Methods §7: a sampled sine misses its crest by
    1 - cos(pi f / fs)).
    """
    fs = filters.rate_hz
    f = fs / 4.0
    amp = 0.2
    g, _ = transfer(rig.model, rig.drive, [f])
    g = g[:, 0]
    worst = int(np.argmax(np.abs(g)))
    # p_i(t) = amp |G_i| cos(2 pi f t + arg G_i + phase - pi/2); put the worst hole's crest
    # at 45 degrees from the samples (f = fs/4: samples every 90 degrees; delay = whole periods)
    assert filters.delay % 4 == 0
    phase = np.pi / 4 - np.angle(g[worst]) + np.pi / 2
    x = _faded_sine(f, amp, 4.0, fs, phase=phase)
    res = simulate(filters, x, ring_out=False)
    steady = slice(int(3.0 * 30), int(3.9 * 30))
    bound = res.envelope[steady].max(axis=0)  # per hole, the envelope bound of |p|
    # true minimum, 16x oversampled, from the transfer function
    t = np.arange(int(3.0 * fs) * 16, int(3.9 * fs) * 16) / (16 * fs)
    true_min = (amp * np.abs(g)[:, None]
                * np.cos(2 * np.pi * f * t[None, :] + (np.angle(g) + phase - np.pi / 2)[:, None])).min(axis=1)
    assert np.all(-bound <= true_min + 1e-3 * amp * np.abs(g).max())
    # the sampled pressure alone would have missed the crest at the worst hole by ~29 %
    p = pressure_signal(filters, x).real[:, int(3.0 * fs):int(3.9 * fs)]
    assert p[worst].min() > 0.75 * true_min[worst]
    assert -bound[worst] == pytest.approx(true_min[worst], rel=2e-3)


def test_simulate_refuses_what_it_cannot_do(filters):
    with pytest.raises(ValueError):
        simulate(filters, np.zeros((100, 2)))  # channels must be mixed first
    with pytest.raises(ValueError):
        simulate(filters, np.zeros(100), envelope=False)  # nothing asked for


def test_a_measured_drive_response_gets_a_causal_minimum_phase():
    """A measured magnitude with a borrowed phase is not causal and never rings down;
    the minimum-phase construction (Oppenheim & Schafer, 3rd ed., s. 13.8) is."""
    import numpy as np

    from showkit.physics.drive import DriveCalibration, _model_shape, driver_shape
    from showkit.physics.response import design_hole_filters
    from showkit.rigfile import load_rig

    base = DriveCalibration()
    f = 25.0 * 2.0 ** (np.arange(0, 37) / 6.0)  # sixth-octave points, as measurement writes them
    # the model's own magnitude: its minimum phase is the model's phase (a band-pass is minimum phase)
    same = DriveCalibration(response_freq_hz=tuple(f), response_db=tuple(20 * np.log10(np.abs(_model_shape(f, base)))))
    probe = np.array([40.0, 100.0, 400.0, 1000.0])
    assert np.allclose(np.angle(driver_shape(probe, same)), np.angle(_model_shape(probe, base)), atol=0.1)
    # a rough measured response: the magnitude is kept at the measured points...
    rough = np.random.default_rng(3).normal(0.0, 2.0, f.size)
    drive = DriveCalibration(response_freq_hz=tuple(f), response_db=tuple(rough))
    assert np.allclose(20 * np.log10(np.abs(driver_shape(f, drive))), rough, atol=1e-9)
    # ...and the tube's impulse responses still ring down in a few seconds
    rig = load_rig()
    filters = design_hole_filters(rig.model, drive)
    assert filters.taps / filters.rate_hz < 5.0
