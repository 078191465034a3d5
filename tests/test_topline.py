"""The trained top-line network (showkit/analysis/topline.py): its arithmetic, its input, its weights.

Its accuracy on music it never heard is measured in tests/test_scan_realmusic.py
(mir_eval.melody raw pitch accuracy on rendered public-domain scores, a soundfont
it was not trained on).
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from showkit.analysis import topline
from showkit.analysis.pitches import dominant_pitch


def _conv(x, w, b, d):
    """topline._conv_last on channels-first arrays (frames, cin, bins)."""
    return topline._conv_last(np.ascontiguousarray(x.transpose(0, 2, 1)), w, b, d).transpose(0, 2, 1)


def _loop_conv(x, w, b, d):
    """The 'same' dilated cross-correlation by its definition, one output at a time."""
    frames, cin, bins = x.shape
    cout, _, k = w.shape
    pad = d * (k - 1) // 2
    out = np.zeros((frames, cout, bins))
    for o in range(cout):
        for j in range(bins):
            acc = np.full(frames, b[o], dtype=float)
            for t in range(k):
                src = j + t * d - pad
                if 0 <= src < bins:
                    acc += x[:, :, src] @ w[o, :, t]
            out[:, o, j] = acc
    return out


@settings(max_examples=25, deadline=None)
@given(st.integers(1, 3), st.integers(1, 3), st.sampled_from([1, 3, 5]), st.integers(1, 4),
       st.integers(5, 20), st.integers(0, 2 ** 31 - 1))
def test_convolution_matches_its_definition(cin, cout, k, d, bins, seed):
    # torch.nn.Conv1d's 'same' cross-correlation (the layers the weights were trained as)
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(2, cin, bins)).astype(np.float32)
    w = rng.normal(size=(cout, cin, k)).astype(np.float32)
    b = rng.normal(size=cout).astype(np.float32)
    np.testing.assert_allclose(_conv(x, w, b, d), _loop_conv(x, w, b, d), rtol=1e-4, atol=1e-4)


def test_convolution_matches_scipy():
    # scipy.ndimage.correlate1d (an independent implementation) for one channel, zero padding
    from scipy.ndimage import correlate1d

    rng = np.random.default_rng(3)
    x = rng.normal(size=(1, 1, 40)).astype(np.float32)
    w = rng.normal(size=(1, 1, 5)).astype(np.float32)
    want = correlate1d(x[0, 0].astype(float), w[0, 0].astype(float), mode="constant", cval=0.0)
    got = _conv(x, w, np.zeros(1, np.float32), 1)[0, 0]
    np.testing.assert_allclose(got, want, rtol=1e-5, atol=1e-5)


def test_weights_fit_the_input():
    net = topline.load_weights()
    channels = len(net.context) * len(topline.HARMONICS)
    assert net.layers[0][0].shape[1] == channels
    assert net.layers[-1][0].shape[0] == 1
    for w, b, d in net.layers:
        assert np.all(np.isfinite(w)) and np.all(np.isfinite(b)) and d >= 1


def _chord(seconds, rate, midis, harmonics=6):
    t = np.arange(int(seconds * rate)) / rate
    x = np.zeros(t.size)
    for m in midis:
        f = 440.0 * 2 ** ((m - 69) / 12)
        for h in range(1, harmonics + 1):
            if h * f < rate / 2:
                x += np.sin(2 * np.pi * h * f * t) / h
    return (0.1 * x).astype(np.float32)


def test_chunks_give_the_whole_track_answer():
    # 70 s read in blocks of three sizes: the chunked analysis equals the whole-track one
    rate = topline.LINE_RATE_HZ
    x = np.concatenate([_chord(35.0, rate, (60, 64, 67)), _chord(35.0, rate, (57, 62, 69))])
    times = np.arange(0, 70.0, 1 / 30)
    net = topline.load_weights()
    whole = topline.log_posterior(topline.line_input(topline.cqt_db(x, rate), times, net.context), net)
    for block in (4096, 7 * rate, x.size):
        got = topline.frame_logp((x[i:i + block] for i in range(0, x.size, block)), times, net)
        assert got.shape == whole.shape and np.abs(got - whole).max() < 0.05


@pytest.mark.parametrize("midi", [48, 60, 72, 84])
def test_a_single_note_is_the_top_note(midi):
    # one harmonic tone: the network's best bin is its fundamental, not a partial (within a semitone)
    rate = topline.LINE_RATE_HZ
    x = _chord(3.0, rate, (midi,))
    times = np.arange(0.5, 2.5, 0.1)
    net = topline.load_weights()
    lp = topline.log_posterior(topline.line_input(topline.cqt_db(x, rate), times, net.context), net)
    best = topline.OUT_LOW_MIDI + lp.argmax(axis=1) * 12.0 / topline.BINS_PER_OCTAVE
    assert np.median(np.abs(best - midi)) <= 1.0


def test_at_notes_reads_the_nearest_bin():
    logp = np.tile(np.arange(topline.OUT_BINS, dtype=float), (2, 1))
    f = topline.out_hz()
    notes = np.array([[f[10], f[11] * 2 ** (0.4 / 36), np.nan], [30.0, f[-1], 1e5]])
    got = topline.at_notes(logp, notes)
    assert got[0, 0] == 10 and got[0, 1] == 11 and got[0, 2] == -30.0
    assert got[1, 0] == -30.0 and got[1, 1] == topline.OUT_BINS - 1 and got[1, 2] == -30.0


def _posterior_at(frames, hz, sure=0.9):
    """A network output that puts ``sure`` of its mass on the bin of ``hz`` (the rest spread evenly)."""
    lp = np.full((frames, topline.OUT_BINS), np.log((1 - sure) / (topline.OUT_BINS - 1)))
    b = int(np.argmin(np.abs(topline.out_hz() - hz)))
    lp[:, b] = np.log(sure)
    return lp


def test_the_network_term_can_move_the_line():
    # two notes per frame; the height term prefers the upper one, a confident network the lower one
    frames = 40
    notes = np.tile([220.0, 440.0], (frames, 1))
    energy = np.ones_like(notes)
    assert np.allclose(dominant_pitch(notes, energy), 440.0)
    assert np.allclose(dominant_pitch(notes, energy, _posterior_at(frames, 220.0, 0.999)), 220.0)
    # a NaN note stays out whatever the network says, and NaN posteriors count as improbable
    notes[:, 0] = np.nan
    assert np.allclose(dominant_pitch(notes, energy, _posterior_at(frames, 220.0, 0.999)), 440.0)
    assert np.allclose(dominant_pitch(notes, energy, np.full((frames, topline.OUT_BINS), np.nan)), 440.0)


def test_the_networks_own_pitch_joins_only_when_it_agrees():
    # frames 0-29: the network agrees with the line (440 Hz); frames 30-39 it hears 660 Hz, a pitch
    # no note was found at.  Agreement 0.75 >= 0.5: its own pitch joins and wins where it is sure.
    frames = 40
    notes = np.tile([220.0, 440.0], (frames, 1))
    energy = np.ones_like(notes)
    lp = _posterior_at(frames, 440.0, 0.999)
    lp[30:] = _posterior_at(10, 660.0, 0.999)
    line = dominant_pitch(notes, energy, lp)
    assert np.allclose(line[:25], 440.0)
    assert np.all(np.abs(1200 * np.log2(line[32:] / 660.0)) < 20)
    # agreement 0.25 < 0.5 (the network hears 660 Hz in 30 frames of 40): only found notes are named
    lp2 = _posterior_at(frames, 660.0, 0.999)
    lp2[30:] = _posterior_at(10, 440.0, 0.999)
    line2 = dominant_pitch(notes, energy, lp2)
    assert set(np.round(line2).tolist()) <= {220.0, 440.0}
    # a frame without notes stays empty even when the network's pitch joins
    notes[5] = np.nan
    assert np.isnan(dominant_pitch(notes, energy, lp)[5])


def test_damaged_weights_are_an_error(tmp_path):
    # garbage, a truncated copy and NaN weights: a ShowkitError naming the file, never a silent line
    from showkit.errors import ShowkitError

    junk = tmp_path / "junk.npz"
    junk.write_bytes(b"not a weights file")
    cut = tmp_path / "cut.npz"
    cut.write_bytes(topline.WEIGHTS.read_bytes()[:5000])
    with np.load(topline.WEIGHTS) as z:
        arrays = {k: z[k] for k in z.files}
    arrays["w2"] = arrays["w2"].copy()
    arrays["w2"][0, 0, 0] = np.nan
    nan = tmp_path / "nan.npz"
    np.savez(nan, **arrays)
    for bad in (junk, cut, nan, tmp_path / "missing.npz"):
        with pytest.raises(ShowkitError) as e:
            topline.load_weights(bad)
        assert str(bad) in str(e.value) and "reinstall" in str(e.value)
