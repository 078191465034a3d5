"""Passages from structure: known section changes found within 1 s; beats; limits."""

from __future__ import annotations

import numpy as np
import pytest
import soxr
from hypothesis import given, settings
from hypothesis import strategies as st

from showkit.analysis import segments as sg
from showkit.analysis.features import track_features
from showkit.demo import synth

RATE = 4800


def features_of(x, rate=synth.RATE_HZ):
    return track_features(soxr.resample(x, rate, RATE), RATE, 160, 2280.0)


def sectioned(order, each=9.0):
    parts = {"pad": lambda: synth.notes_track([(0.0, each, synth.DEMO_MODE_HZ[3], 0.3),
                                                (0.0, each, synth.DEMO_MODE_HZ[5], 0.3)], each),
             "hits": lambda: synth.drum_pattern(each, seed=2),
             "tune": lambda: np.concatenate([synth.fm_tone(f, 0.3) * 0.4 for f in
                                             [synth.between(4, 5), synth.between(6, 7)] * int(each / 0.6)])}
    return np.concatenate([parts[p]()[:int(each * synth.RATE_HZ)] for p in order])


@pytest.mark.parametrize("order", [("pad", "hits", "tune"), ("hits", "tune", "pad")])
def test_known_section_changes_within_one_second(order):
    x = sectioned(order)
    spans, _ = sg.passages(features_of(x), x.size / synth.RATE_HZ)
    edges = [a for a, _ in spans[1:]]
    for truth in (9.0, 18.0):
        assert min(abs(e - truth) for e in edges) <= 1.0  # issue 4: within 1 s
    assert spans[0][0] == 0.0 and spans[-1][1] == pytest.approx(27.0)


def test_steady_beat_is_found():
    x = synth.drum_pattern(16.0, beat_s=0.5, seed=4)
    beats = sg.beat_times(features_of(x).onset, 30.0)
    period = np.median(np.diff(beats))
    # the pattern repeats every beat (hat) and every two beats (kick and burst)
    assert min(abs(period - 0.5), abs(period - 1.0)) < 0.04
    phase = (beats % 0.5)
    assert np.all(np.minimum(phase, 0.5 - phase) < 0.05)


def test_no_beats_in_held_tones():
    x = synth.notes_track([(0.0, 12.0, 240.0, 0.4)], 12.0)
    assert sg.beat_times(features_of(x).onset, 30.0).size == 0


def test_limits_on_passage_lengths():
    # one unchanging 70 s tone: no boundary from novelty, cut into passages of at most 30 s
    x = synth.notes_track([(0.0, 70.0, synth.DEMO_MODE_HZ[4], 0.4)], 70.0)
    spans, _ = sg.passages(features_of(x), 70.0)
    lengths = [b - a for a, b in spans]
    assert max(lengths) <= sg.MAX_PASSAGE_S + 1e-9
    assert min(lengths) >= sg.MIN_PASSAGE_S
    assert spans[0][0] == 0.0 and spans[-1][1] == 70.0


def test_checkerboard_sees_a_block_change():
    # Foote 2000: a similarity matrix of two uniform blocks gives its novelty peak at the change
    blocks = np.vstack([np.tile([1.0, 0.0], (20, 1)), np.tile([0.0, 1.0], (20, 1))])
    curve = sg.novelty(sg.self_similarity(blocks), 6)
    assert int(np.argmax(curve)) == 20
    # same-side quadrants hold similarity 1, cross quadrants 0; each half of |K| weighs 0.5,
    # so the kernel gives 0.5 * 1 - 0.5 * 0, halved to the 0-1 scale
    assert curve[20] == pytest.approx(0.25, abs=0.01)
    assert curve[10] == pytest.approx(0.0, abs=1e-9)  # inside a uniform block: no change


@settings(max_examples=40, deadline=None)
@given(n=st.integers(1, 90), dims=st.integers(1, 6), half=st.integers(2, 14), seed=st.integers(0, 2**31),
       empty=st.integers(0, 5))
def test_banded_novelty_equals_the_full_matrix(n, dims, half, seed, empty):
    """The banded computation reads the same similarities as the full n x n one (Foote 2000 novelty):
    equal to 1e-12 for any short input, including tracks shorter than the kernel and empty blocks."""
    rng = np.random.default_rng(seed)
    blocks = rng.normal(size=(n, dims))
    blocks[rng.integers(0, n, size=min(empty, n))] = 0.0
    full = sg.novelty(sg.self_similarity(blocks), half)
    np.testing.assert_allclose(sg.banded_novelty(blocks, half), full, rtol=0, atol=1e-12)


def test_banded_novelty_on_real_features():
    """Same curve from the features of a sectioned track, at the kernel size passages() uses."""
    blocks, _ = sg.block_features(features_of(sectioned(("pad", "hits", "tune"))))
    half = max(2, round(sg.KERNEL_HALF_S * sg.BLOCK_RATE_HZ))
    full = sg.novelty(sg.self_similarity(blocks), half)
    assert full.max() > sg.NOVELTY_FLOOR  # a curve with peaks, not zeros
    np.testing.assert_allclose(sg.banded_novelty(blocks, half), full, rtol=0, atol=1e-12)


def test_chroma_folds_notes_onto_pitch_classes():
    """12-TET with A4 = 440 Hz (closed form): A3, A4 -> class 0, middle C (261.63 Hz) -> 3 semitones above A,
    E5 (659.26 Hz) -> 7; amplitude = sqrt(energy); NaN and silent notes count nothing."""
    hz = np.array([[220.0, 440.0, np.nan], [261.63, 659.26, 300.0]])
    energy = np.array([[4.0, 9.0, 1.0], [16.0, 1.0, 0.0]])
    c = sg.chroma(hz, energy)
    expected = np.zeros((2, 12))
    expected[0, 0] = 2.0 + 3.0
    expected[1, 3], expected[1, 7] = 4.0, 1.0
    np.testing.assert_allclose(c, expected)


def test_same_passages_at_another_level():
    """The features leave the level out (cepstrum without c0, onsets relative to the track's own,
    chroma and sustain shares), so the same music 20 dB softer gets the same boundaries."""
    x = sectioned(("hits", "pad", "tune"))
    loud, _ = sg.passages(features_of(x), x.size / synth.RATE_HZ)
    soft, _ = sg.passages(features_of(0.1 * x), x.size / synth.RATE_HZ)
    assert len(loud) == len(soft)
    np.testing.assert_allclose([a for a, _ in soft], [a for a, _ in loud], atol=0.3)


def test_adaptive_threshold():
    """A peak counts when above the floor and ADAPT_RATIO times the running median: on a flat
    curve at 0.2 a bump to 0.25 stays below 1.5 x 0.2, one to 0.4 passes; a flat curve at
    0.01 is held at the floor."""
    block_s = 1.0 / sg.BLOCK_RATE_HZ
    curve = np.full(400, 0.2)
    curve[100], curve[300] = 0.25, 0.4
    thr = sg.threshold(curve, block_s)
    assert curve[100] < thr[100] and curve[300] >= thr[300]
    assert thr[200] == pytest.approx(sg.ADAPT_RATIO * 0.2)
    assert np.all(sg.threshold(np.full(50, 0.01), block_s) == sg.NOVELTY_FLOOR)


def test_refine_moves_a_boundary_to_the_sharp_change_nearby():
    """Two uniform blocks of features changing at block 40: a coarse peak 1 block off moves to 40
    (Foote 2000: the narrower kernel peaks at the change); one farther than REFINE_S stays near."""
    blocks = np.vstack([np.tile([1.0, 0.0], (40, 1)), np.tile([0.0, 1.0], (40, 1))])
    block_s = 1.0 / sg.BLOCK_RATE_HZ
    moved = sg.refine(blocks, np.array([41, 39, 10]), block_s)
    assert moved[0] == 40 and moved[1] == 40
    assert abs(moved[2] - 10) <= round(sg.REFINE_S / block_s)


def test_a_slope_across_a_rising_threshold_is_no_peak():
    """Peaks are true local maxima of the novelty, judged against the threshold where they stand
    (scipy.signal.find_peaks with height and distance).  Zeroing the values under the threshold
    first invented a peak on a slope: here the curve rises all the way (closed form: a strictly
    increasing curve has no interior maximum) while the threshold overtakes it at the end."""
    curve = np.linspace(0.2, 0.5, 40)
    thr = np.where(np.arange(40) < 30, 0.1, 0.9)
    assert sg.pick_peaks(curve, 4, thr).size == 0
    zeroed = np.where(curve >= thr, curve, 0.0)  # what the old selection looked at
    assert zeroed[29] > zeroed[28] and zeroed[29] > zeroed[30]  # ... a "maximum" at 29
    # two true maxima 10 blocks apart, the lower one under its threshold: only the higher one;
    # and of two within the spacing, the higher one (brute force over the closed-form bumps)
    k = np.arange(60)
    bumps = 0.5 * np.exp(-0.5 * ((k - 20) / 2.0) ** 2) + 0.3 * np.exp(-0.5 * ((k - 30) / 2.0) ** 2)
    assert list(sg.pick_peaks(bumps, 4, 0.35)) == [20]
    assert list(sg.pick_peaks(bumps, 4, 0.1)) == [20, 30]
    assert list(sg.pick_peaks(bumps, 12, 0.1)) == [20]


@settings(max_examples=300, deadline=None)
@given(st.lists(st.one_of(st.integers(0, 6), st.sampled_from([np.inf, -np.inf])), min_size=0, max_size=80),
       st.integers(1, 12),
       st.one_of(st.floats(0.0, 6.0), st.lists(st.floats(0.0, 6.0), min_size=80, max_size=80)))
def test_peaks_are_scipy_find_peaks(values, spacing, height):
    """pick_peaks against its reference, scipy.signal.find_peaks(height=, distance=) (SciPy 1.0,
    Virtanen et al. 2020), on curves of small whole numbers and infinities: flat tops (of inf too),
    ties between peaks, plateaus at the ends and thresholds per block are common there."""
    from scipy.signal import find_peaks

    curve = np.asarray(values, dtype=float) / 6.0
    thr = (np.asarray(height[:curve.size]) if isinstance(height, list) else np.float64(height)) / 6.0
    got = sg.pick_peaks(curve, spacing, thr)
    want = find_peaks(curve, height=thr, distance=spacing)[0] if curve.size >= 3 else np.zeros(0, int)
    assert got.tolist() == want.tolist()
