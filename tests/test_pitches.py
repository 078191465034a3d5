"""Dominant pitches per frame: tones at known MIDI notes, pYIN agreement, mode mapping."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from showkit.analysis.features import track_features
from showkit.analysis.pitches import ModeTable, dominant_pitch, map_to_modes, spectral_peaks
from showkit.physics.pitch import midi_to_hz

RATE = 4800
HOP = 160


def tone(freq, seconds=2.0, rate=RATE, harmonics=(1.0, 0.3, 0.1)):
    t = np.arange(int(seconds * rate)) / rate
    return sum(a * np.sin(2 * np.pi * (k + 1) * freq * t + k) for k, a in enumerate(harmonics)) * 0.3


def measured(x, rate=RATE):
    tf = track_features(x, rate, HOP, 2280.0)
    d = dominant_pitch(tf.peak_hz, tf.peak_energy)
    return d[15:-15]


@pytest.mark.parametrize("midi", [43, 50, 57, 61.5, 69, 74, 79])
def test_known_notes_within_5_cents(midi):
    # tuning formula f = 440 * 2^((m - 69) / 12), ISO 16:1975 (physics.md section 8)
    f = 440.0 * 2 ** ((midi - 69) / 12)
    d = measured(tone(f))
    assert np.all(np.abs(1200 * np.log2(d / f)) < 5.0)


@pytest.mark.parametrize("midi", [45, 57, 64])
def test_agrees_with_pyin(midi):
    # librosa.pyin (Mauch & Dixon, ICASSP 2014) on the same signal at 22.05 kHz
    import librosa
    import soxr

    f = float(midi_to_hz(midi))
    x = tone(f, 1.5, 22050)
    f0, voiced, _ = librosa.pyin(x, fmin=60, fmax=1000, sr=22050, frame_length=2048)
    ref = np.nanmedian(f0[voiced])
    ours = np.median(measured(soxr.resample(x, 22050, RATE)))
    assert abs(1200 * np.log2(ours / ref)) < 10.0  # pYIN's pitch grid is 10 cents (librosa 0.11 pyin default resolution=0.1 semitone)
    assert abs(1200 * np.log2(ours / f)) < 5.0


def test_two_tones_are_both_found():
    f1, f2 = 185.0, 402.0
    x = tone(f1, harmonics=(1.0,)) + tone(f2, harmonics=(0.7,))
    tf = track_features(x, RATE, HOP, 2280.0)
    top2 = np.sort(tf.peak_hz[30, np.argsort(-tf.peak_energy[30])[:2]])
    assert np.allclose(top2, [f1, f2], rtol=0.002)
    share = tf.peak_energy[30, np.argsort(-tf.peak_energy[30])[:2]].sum() / tf.energy[30]
    assert share > 0.95  # nearly all the frame's energy is in the two peaks


def test_silence_has_no_peaks():
    p = np.zeros((100, 5), dtype=np.float32)
    f, e = spectral_peaks(p, 30.0, 2.0)
    assert np.all(np.isnan(f)) and np.all(e == 0)


class _M:
    def __init__(self, n, f, q, pattern):
        self.n, self.frequency_hz, self.q, self.pattern, self.note = n, f, q, pattern, "X"


TABLE = ModeTable.from_modes([_M(0, 80.0, 5.0, "breathing"), _M(1, 100.0, 20.0, "readable"),
                              _M(2, 140.0, 40.0, "readable"), _M(3, 180.0, 60.0, "unresolved")])


def test_mapping_offsets_and_band():
    f = np.array([100.0, 100.0 * 2 ** (20 / 1200), 140.0 * 2 ** (-5 / 1200), 180.0, 80.0, np.nan])
    hits = map_to_modes(f, TABLE)
    assert list(hits.index[:5]) == [1, 1, 2, 3, 0] and hits.index[5] == -1
    assert np.allclose(hits.cents[:3], [0.0, 20.0, -5.0])
    # half-power band f_n / Q (physics.md section 8): Q = 20 -> +-43 cents, Q = 40 -> +-21.6 cents
    assert hits.in_band[1] and hits.in_band[2]
    assert hits.weight[0] == pytest.approx(1.0)
    assert hits.weight[3] == 0.0 and hits.weight[4] == 0.0  # unresolved and breathing modes do not count


@settings(max_examples=40, deadline=None)
@given(st.floats(60.0, 1500.0), st.floats(-300.0, 300.0))
def test_shift_is_the_same_as_moving_the_pitch(f, shift):
    a = map_to_modes(np.array([f]), TABLE, shift)
    b = map_to_modes(np.array([f * 2 ** (shift / 1200)]), TABLE)
    assert a.index[0] == b.index[0]
    assert a.cents[0] == pytest.approx(b.cents[0], abs=1e-6)
    assert 0.0 <= a.weight[0] <= 1.0


def test_hpss_masks_match_librosa():
    # Fitzgerald (DAFx 2010) as implemented by librosa.decompose.hpss(mask=True): the same medians
    import librosa

    rng = np.random.default_rng(0)
    s = np.abs(rng.standard_normal((60, 80))).astype(np.float32)
    s[20, :] += 8.0  # a held tone
    s[:, 40] += 8.0  # a hit
    ours_h, ours_p = __import__("showkit.analysis.spectral", fromlist=["x"]).hpss_masks(s, (7, 11))  # (bins, frames)
    ref_h, ref_p = librosa.decompose.hpss(s, kernel_size=(11, 7), mask=True)  # (harmonic: frames, percussive: bins)
    assert np.allclose(ours_h, ref_h, atol=1e-5) and np.allclose(ours_p, ref_p, atol=1e-5)
    assert ours_h[20, 10] > 0.9 and ours_p[30, 40] > 0.9
