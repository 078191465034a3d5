"""Audio in: reading, checking, mixing to mono, resampling (showkit.analysis.audio)."""

from __future__ import annotations

import hashlib

import numpy as np
import pytest
import soundfile as sf
import soxr

from showkit.analysis.audio import (audio_info, content_hash, load_audio, read_blocks,
                                    samples_hash)
from showkit.errors import AudioError


def _tone(rate, seconds=1.0, freq=300.0, amp=0.5):
    t = np.arange(int(round(seconds * rate))) / rate
    return amp * np.sin(2 * np.pi * freq * t)


def _amplitude_at(x, rate, freq):
    """Amplitude of the component at ``freq`` by a least-squares fit (numpy)."""
    t = np.arange(x.size) / rate
    basis = np.stack([np.sin(2 * np.pi * freq * t), np.cos(2 * np.pi * freq * t)], axis=1)
    coef, *_ = np.linalg.lstsq(basis, x, rcond=None)
    return float(np.hypot(*coef))


def test_missing_folder_and_empty(tmp_path):
    with pytest.raises(AudioError, match="no such audio file"):
        audio_info(tmp_path / "nope.wav")
    with pytest.raises(AudioError, match="folder"):
        audio_info(tmp_path)
    empty = tmp_path / "empty.wav"
    empty.write_bytes(b"")
    with pytest.raises(AudioError, match="empty"):
        audio_info(empty)


def test_not_audio(tmp_path):
    text = tmp_path / "notes.wav"
    text.write_text("these are my show notes, not a recording\n" * 20)
    with pytest.raises(AudioError, match="not an audio file") as err:
        audio_info(text)
    assert "\n" not in err.value.line()


def test_zero_length_wav(tmp_path):
    path = tmp_path / "zero.wav"
    sf.write(path, np.zeros((0, 1)), 44100)
    with pytest.raises(AudioError, match="no samples"):
        load_audio(path)


def test_truncated_wav_gives_the_part_that_is_there(tmp_path):
    full = tmp_path / "full.wav"
    x = _tone(44100, 2.0)
    sf.write(full, x, 44100, subtype="PCM_16")
    cut = tmp_path / "cut.wav"
    data = full.read_bytes()
    cut.write_bytes(data[:len(data) // 2])
    # libsndfile reports the frames that are present: a correct answer for them, or a clear error
    try:
        audio = load_audio(cut)
    except AudioError as exc:
        assert "truncated" in exc.what or "decoded" in exc.what
    else:
        n = audio.samples.size
        assert 0 < n < x.size
        np.testing.assert_allclose(audio.samples, sf.read(full)[0][:n], atol=1e-12)


def test_truncated_flac_is_a_clear_error(tmp_path):
    full = tmp_path / "full.flac"
    sf.write(full, _tone(44100, 2.0), 44100, subtype="PCM_16")
    cut = tmp_path / "cut.flac"
    data = full.read_bytes()
    cut.write_bytes(data[:len(data) // 2])
    with pytest.raises(AudioError) as err:
        load_audio(cut)
    assert "truncated" in err.value.what or "decoded" in err.value.what
    assert str(cut) in err.value.line()


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_non_finite_samples(tmp_path, bad):
    x = _tone(8000, 1.0)
    x[3000] = bad
    path = tmp_path / "bad.wav"
    sf.write(path, x, 8000, subtype="FLOAT")
    with pytest.raises(AudioError, match="NaN or infinite") as err:
        load_audio(path)
    assert "0.375 s" in err.value.what  # 3000 / 8000


@pytest.mark.parametrize("rate", [8000, 11025, 22050, 44100, 48000, 96000, 192000])
def test_rates_resample_to_the_same_tone(tmp_path, rate):
    path = tmp_path / f"tone_{rate}.wav"
    sf.write(path, _tone(rate, 1.0), rate, subtype="FLOAT")
    audio = load_audio(path, rate_hz=4800)
    assert audio.rate_hz == 4800
    assert abs(audio.samples.size - 4800) <= 2
    # amplitude and frequency survive (soxr HQ passband is flat to ~0.01 dB; from memory)
    inner = audio.samples[200:-200]
    assert _amplitude_at(inner, 4800, 300.0) == pytest.approx(0.5, rel=2e-3)


@pytest.mark.parametrize("channels", [1, 2, 3, 6, 8])
def test_channels_are_averaged(tmp_path, channels):
    x = _tone(16000, 0.5)
    weights = np.linspace(1.0, -0.5, channels)
    path = tmp_path / f"c{channels}.wav"
    sf.write(path, x[:, None] * weights[None, :], 16000, subtype="FLOAT")
    info = audio_info(path)
    assert info.channels == channels and info.frames == x.size
    audio = load_audio(path)
    np.testing.assert_allclose(audio.samples, x * weights.mean(), atol=1e-6)


def test_streamed_blocks_match_one_shot_resampling(tmp_path):
    rate = 44100
    rng = np.random.default_rng(4)
    x = 0.1 * rng.standard_normal(3 * rate)
    path = tmp_path / "noise.wav"
    sf.write(path, x, rate, subtype="FLOAT")
    native = np.concatenate(list(read_blocks(path, block_frames=5000)))
    np.testing.assert_allclose(native, x, atol=1e-7)
    streamed = np.concatenate(list(read_blocks(path, 4800, block_frames=7777)))
    once = soxr.resample(x.astype(np.float32).astype(float), rate, 4800, quality="HQ")  # soxr one-shot
    assert abs(streamed.size - once.size) <= 1
    k = min(streamed.size, once.size)
    assert np.abs(streamed[:k] - once[:k]).max() < 1e-6


def test_passages_and_their_errors(tmp_path):
    path = tmp_path / "t.wav"
    sf.write(path, _tone(8000, 3.0), 8000, subtype="FLOAT")
    audio = load_audio(path, start_s=1.0, end_s=1.5)
    assert audio.samples.size == 4000 and audio.start_s == 1.0
    np.testing.assert_allclose(audio.samples, _tone(8000, 3.0)[8000:12000], atol=1e-7)
    for start, end, word in [(-1.0, None, "before"), (5.0, None, "past the end"),
                             (2.0, 1.0, "not after"), (0.0, 9.0, "past the end"),
                             (float("nan"), None, "finite")]:
        with pytest.raises(AudioError, match=word):
            load_audio(path, start_s=start, end_s=end)


def test_a_very_short_file_is_read(tmp_path):
    path = tmp_path / "short.wav"
    sf.write(path, _tone(44100, 0.05), 44100)
    audio = load_audio(path, rate_hz=4800)
    assert abs(audio.samples.size - 240) <= 1


def test_hashes(tmp_path):
    a = tmp_path / "a.wav"
    sf.write(a, _tone(8000, 0.2), 8000)
    # reference: hashlib.sha256 over the file's bytes
    assert content_hash(a) == hashlib.sha256(a.read_bytes()).hexdigest()
    b = tmp_path / "b.wav"
    sf.write(b, _tone(8000, 0.2, amp=0.25), 8000)
    assert content_hash(a) != content_hash(b)
    x = _tone(8000, 0.2)
    assert samples_hash(x, 8000) == samples_hash(x.copy(), 8000)
    assert samples_hash(x, 8000) != samples_hash(x, 16000)
    assert len(samples_hash(x, 8000)) == 16
    with pytest.raises(AudioError):
        content_hash(tmp_path / "gone.wav")


def test_mono_and_first_channel_say_what_they_take():
    """Two ways to one channel, one helper each: a signal to play is the mean of its channels
    (a loud right channel counts towards a ceiling), a measurement recording is its first
    channel, the microphone (a silent second input does not halve the level read).
    Reference: numpy mean and indexing on a hand-made two-channel array."""
    from showkit.analysis.audio import first_channel, mono
    from showkit.analysis.measurement import sine_amplitude

    t = np.arange(4800) / 48000
    mic = 0.5 * np.sin(2 * np.pi * 1000 * t)
    two = np.stack([mic, np.zeros_like(mic)], axis=1)
    np.testing.assert_array_equal(mono(two), two.mean(axis=1))
    np.testing.assert_array_equal(first_channel(two), mic)
    assert sine_amplitude(two, 48000, 1000.0) == pytest.approx(0.5, rel=1e-9)
    bad = two.copy()
    bad[3, 1] = np.nan
    with pytest.raises(AudioError):
        mono(bad)
