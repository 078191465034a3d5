"""Every sounding note per frame: tones at known MIDI notes, chords, pYIN agreement, mode mapping."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from showkit.analysis import multipitch
from showkit.analysis.features import track_features
from showkit.analysis.pitches import ModeTable, dominant_pitch
from showkit.analysis.score import nearest_modes
from showkit.physics.pitch import midi_to_hz

RATE = 4800
HOP = 160


def tone(freq, seconds=2.0, rate=RATE, harmonics=(1.0, 0.3, 0.1)):
    t = np.arange(int(seconds * rate)) / rate
    return sum(a * np.sin(2 * np.pi * (k + 1) * freq * t + k) for k, a in enumerate(harmonics)) * 0.3


def measured(x, rate=RATE):
    tf = track_features(x, rate, HOP, 2280.0)
    d = dominant_pitch(tf.notes_hz, tf.notes_energy)
    return d[15:-15]


@pytest.mark.parametrize("midi", [43, 50, 57, 61.5, 69, 74, 79])
def test_known_notes_within_5_cents(midi):
    # tuning formula f = 440 * 2^((m - 69) / 12), ISO 16:1975 (DEVELOPERS.md Methods §8)
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


def test_every_note_of_a_chord_is_found():
    # a four-note chord of harmonic tones (C3 E3 G3 C4 plus one a semitone off): the fundamentals,
    # not the partials, are the notes (12-TET formula, ISO 16:1975)
    midis = [48, 52, 55, 61]
    x = sum(tone(float(midi_to_hz(m)), harmonics=(1.0, 0.5, 0.33, 0.25)) for m in midis)
    tf = track_features(x, RATE, HOP, 2280.0)
    frame = tf.notes_hz[30]
    found = np.sort(frame[np.isfinite(frame)])
    for m in midis:
        f = float(midi_to_hz(m))
        assert np.min(np.abs(1200 * np.log2(found / f))) < 8.0, m  # partials of the others overlap: a few cents
    assert found.size <= len(midis) + 2  # an extra note or two (octaves) may come with them


def test_the_same_at_another_level():
    x = tone(220.0) + tone(330.0)
    a = track_features(x, RATE, HOP, 2280.0)
    b = track_features(0.05 * x, RATE, HOP, 2280.0)
    assert np.allclose(np.nan_to_num(a.notes_hz[20:-20]), np.nan_to_num(b.notes_hz[20:-20]), atol=0.05)
    share_a = a.notes_energy / a.energy[:, None]
    share_b = b.notes_energy / b.energy[:, None]
    assert np.allclose(share_a[20:-20], share_b[20:-20], atol=1e-3)


def test_silence_has_no_notes():
    tf = track_features(np.zeros(RATE * 2), RATE, HOP, 2280.0)
    assert np.all(np.isnan(tf.notes_hz)) and np.all(tf.notes_energy == 0)


def test_hann_lobe_closed_form():
    # Harris (Proc. IEEE 1978): the Hann kernel is 1 at 0, 0.5 at one bin, 0 from two bins
    assert multipitch.hann_lobe(0.0) == pytest.approx(1.0)
    assert multipitch.hann_lobe(1.0) == pytest.approx(0.5)
    assert multipitch.hann_lobe(2.0) == 0.0 and multipitch.hann_lobe(-2.5) == 0.0


class _M:
    def __init__(self, n, f, q, pattern):
        self.n, self.frequency_hz, self.q, self.pattern, self.note = n, f, q, pattern, "X"


TABLE = ModeTable.from_modes([_M(0, 80.0, 5.0, "breathing"), _M(1, 100.0, 20.0, "readable"),
                              _M(2, 140.0, 40.0, "readable"), _M(3, 180.0, 60.0, "unresolved")])


def test_mapping_offsets_and_band():
    f = np.array([100.0, 100.0 * 2 ** (20 / 1200), 140.0 * 2 ** (-5 / 1200), 180.0, 80.0, np.nan])
    j, cents = nearest_modes(f, TABLE)
    assert list(j[:5]) == [1, 1, 2, 3, 0] and j[5] == -1
    assert np.allclose(cents[:3], [0.0, 20.0, -5.0])
    # half-power half-width f_n / (2 Q) (DEVELOPERS.md Methods §8): Q = 20 -> 43 cents, Q = 40 -> 21.6 cents
    assert TABLE.half_width_cents[1] == pytest.approx(1200 * np.log2(1 + 0.5 / 20))


@settings(max_examples=40, deadline=None)
@given(st.floats(60.0, 1500.0), st.floats(-300.0, 300.0))
def test_shift_is_the_same_as_moving_the_pitch(f, shift):
    a = nearest_modes(np.array([f]), TABLE, shift)
    b = nearest_modes(np.array([f * 2 ** (shift / 1200)]), TABLE)
    assert a[0][0] == b[0][0]
    assert a[1][0] == pytest.approx(b[1][0], abs=1e-6)


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


@settings(max_examples=40, deadline=None)
@given(st.integers(0, 40), st.integers(0, 60), st.integers(0, 60))
def test_padded_slice_is_a_slice_of_the_padded_signal(left, start, length):
    # the blocks of a long track read the zero-padded signal without a padded copy of it
    from showkit.analysis.features import _padded_slice

    x = np.arange(1, 31, dtype=np.float32)
    padded = np.pad(x, (left, 200))
    assert np.array_equal(_padded_slice(x, left, start, start + length), padded[start:start + length])


def _path_score(f, e, path):
    """Score of one path through the lattice, written out from the docstring's formula (DEVELOPERS.md
    Methods §8b) -- the reference for the Viterbi search below."""
    from showkit.analysis import pitches as P

    total = 0.0
    for t, k in enumerate(path):
        total += (P.DOMINANT_ENERGY_WEIGHT * np.log(e[t, k] / e[t].max())
                  + P.DOMINANT_HEIGHT_WEIGHT * np.log2(f[t, k] / P.DOMINANT_HEIGHT_REF_HZ))
        if t:
            jump = abs(12.0 * np.log2(f[t, k] / f[t - 1, path[t - 1]]))
            total -= P.DOMINANT_JUMP_WEIGHT * min(jump, P.DOMINANT_JUMP_CAP_SEMITONES)
    return total


@settings(max_examples=25, deadline=None)
@given(st.integers(0, 2 ** 31 - 1))
def test_dominant_line_is_the_best_path(seed):
    # the decoded line scores as high as the best of all 3^6 paths found by exhaustive enumeration
    import itertools

    rng = np.random.default_rng(seed)
    f = 100.0 * 2.0 ** rng.uniform(0.0, 3.0, size=(6, 3))
    e = rng.uniform(0.01, 1.0, size=(6, 3))
    line = dominant_pitch(f, e)
    got = [int(np.nonzero(f[t] == line[t])[0][0]) for t in range(6)]
    best = max(_path_score(f, e, p) for p in itertools.product(range(3), repeat=6))
    assert _path_score(f, e, got) == pytest.approx(best, abs=1e-9)


def test_dominant_line_holds_through_a_flickering_partial_and_a_gap():
    # a held melody note (440 Hz) under a louder bass; in every third frame an upper partial of the bass
    # (2 x 330 Hz) is listed too: the line stays on the melody; frames without notes give NaN
    f = np.full((30, 3), np.nan)
    e = np.zeros((30, 3))
    f[:, 0], e[:, 0] = 110.0, 1.0
    f[:, 1], e[:, 1] = 440.0, 0.3
    f[::3, 2], e[::3, 2] = 660.0, 0.05
    f[12:15], e[12:15] = np.nan, 0.0
    line = dominant_pitch(f, e)
    assert np.all(np.isnan(line[12:15]))
    assert np.all(line[np.r_[0:12, 15:30]] == 440.0)


@pytest.mark.parametrize("gain", [1.0, 0.5])
def test_own_timbre_finds_a_doubling_its_partial_hides(monkeypatch, gain):
    # A tone with a weak 2nd and a strong 3rd partial (amplitudes 1, 0.2, 0.3, 0.1, 0.1) at 220 Hz for 6 s,
    # doubled an octave above by the same timbre (at `gain`) for its last second.  Closed form of the
    # cancellation (Klapuri 2006 with the track's own partial amplitudes, DEVELOPERS.md Methods §8b): the
    # template learnt from the track's notes gives the 2nd partial about 0.2 of the fundamental, so once the
    # 220 Hz note is found, the doubling's energy at 440 Hz (gain >= 0.5 of the fundamental, more than twice
    # what the template explains) stays in the residual and is found; alone, the 2nd partial is explained.
    # Without the template the whole 2nd partial is cancelled and the doubling is missed (today's behaviour).
    from showkit.analysis import features

    timbre = (1.0, 0.2, 0.3, 0.1, 0.1)
    low = tone(220.0, 6.0, harmonics=timbre)
    t = np.arange(low.size) / RATE
    x = low + np.where(t >= 5.0, gain * tone(440.0, 6.0, harmonics=timbre), 0.0)
    frame_s = np.arange(features.spectral.frame_count(x.size, HOP)) * HOP / RATE
    alone = (frame_s > 0.3) & (frame_s < 4.7)
    doubled = (frame_s > 5.3) & (frame_s < 5.7)

    def has(notes_hz, f_hz):
        with np.errstate(invalid="ignore"):
            return np.any(np.abs(1200.0 * np.log2(notes_hz / f_hz)) < 30.0, axis=1)

    found = {}
    for own in (False, True):
        monkeypatch.setattr(features, "OWN_TIMBRE", own)
        found[own] = track_features(x, RATE, HOP, 2280.0).notes_hz
    for own in (False, True):
        assert has(found[own], 220.0)[alone | doubled].all()
        assert not has(found[own], 440.0)[alone].any()          # the 2nd partial alone is no note
    assert has(found[True], 440.0)[doubled].all()               # the doubling is found with the template ...
    assert not has(found[False], 440.0)[doubled].any()          # ... and hidden without it


def test_learnt_template_is_the_quantile_of_the_nearby_notes():
    # multipitch.learn_template against numpy's quantile over the notes within the reach, computed here
    # directly (closed form of the definition); a register without enough notes takes the nearest filled one
    est = multipitch.estimator(RATE, 1024, 3, 480)
    rng = np.random.default_rng(5)
    semis = 12.0 * np.log2(est.f0_hz / multipitch.F0_MIN_HZ)
    cands = np.concatenate([np.nonzero(np.abs(semis - 24.0) < 1.0)[0], np.nonzero(np.abs(semis - 36.0) < 1.0)[0]])
    cands = rng.choice(cands, size=200)
    ratios = rng.uniform(0.0, 1.0, size=(cands.size, multipitch.MAX_HARMONICS))
    tab = est.learn_template(cands, ratios)
    assert tab.shape == (est.f0_hz.size, multipitch.MAX_HARMONICS)
    for target in (24, 30, 36):
        c = int(np.argmin(np.abs(semis - target)))
        near = np.abs(semis[cands] - np.rint(semis[c])) < multipitch.TEMPLATE_REACH_SEMITONES
        expect = np.quantile(ratios[near], multipitch.TEMPLATE_QUANTILE, axis=0)
        assert np.allclose(tab[c], expect, atol=1e-6), target
    # far below every note: the template of the lowest semitone with enough notes within the reach
    low = int(np.argmin(np.abs(semis - 5.0)))
    counts = [np.sum(np.abs(semis[cands] - g) < multipitch.TEMPLATE_REACH_SEMITONES) for g in range(60)]
    g = next(g for g, n in enumerate(counts) if n >= multipitch.TEMPLATE_MIN_NOTES)
    near = np.abs(semis[cands] - g) < multipitch.TEMPLATE_REACH_SEMITONES
    assert np.allclose(tab[low], np.quantile(ratios[near], multipitch.TEMPLATE_QUANTILE, axis=0), atol=1e-6)
    assert est.learn_template(cands[:3], ratios[:3]) is None    # too few notes: no template


def test_a_template_with_no_usable_partial_cancels_as_observed():
    # A template row with no partial above TEMPLATE_MIN_PARTIAL explains nothing: the found note's partials
    # are cancelled as observed, exactly as without a template (it once gave inf * 0 = NaN there)
    est = multipitch.estimator(RATE, 1024, 3, 480)
    rng = np.random.default_rng(3)
    mag = rng.rayleigh(1e-3, size=(480, 40)).astype(np.float32)
    for f0 in (110.0, 220.0, 330.0):   # three harmonic tones in every frame
        for m in range(1, 9):
            k = int(round(m * f0 / est.bin_hz)) - 3
            if 0 <= k < 480:
                mag[k] += 0.5 / m
    white = est.whiten(mag, 1e-6)
    zeros = np.zeros((est.f0_hz.size, multipitch.MAX_HARMONICS), dtype=np.float32)
    found, sal = est.estimate(white, template=zeros)
    base, base_sal = est.estimate(white)
    assert np.isfinite(sal).all()
    assert np.array_equal(found, base) and np.allclose(sal, base_sal)
    assert (found[:, 0] >= 0).all()
