"""Transposition: a piece written a known number of semitones off the modes gets that shift back."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

from showkit.analysis import transpose as tr
from showkit.analysis.scan import scan_track
from showkit.demo import synth
from showkit.rigfile import load_rig

RATE = 44100


@pytest.fixture(scope="module")
def rig():
    return load_rig()


def written_off(semitones, modes=(2, 3, 4, 5, 3), each=1.8):
    shift = 2 ** (semitones / 12)
    notes = [(each * k, each, synth.DEMO_MODE_HZ[n] * shift, 0.4) for k, n in enumerate(modes)]
    return synth.notes_track(notes, each * len(modes))


@pytest.mark.parametrize("offset", [2.0, -1.5])
def test_known_offset_is_undone(rig, tmp_path, offset):
    path = tmp_path / "off.wav"
    sf.write(str(path), written_off(offset), RATE, subtype="FLOAT")
    t = scan_track(rig, path)
    assert t["transpose_semitones"] == pytest.approx(-offset, abs=0.25)  # issue 12: within 25 cents
    assert t["transpose_score"] > t["score"] + 20


def test_on_mode_piece_needs_no_shift(rig, tmp_path):
    path = tmp_path / "on.wav"
    sf.write(str(path), written_off(0.0), RATE, subtype="FLOAT")
    t = scan_track(rig, path)
    assert t["transpose_semitones"] == 0.0 and t["transpose_score"] == t["score"]


def test_curve_finds_the_shift_and_choice():
    # notes written 130 cents above two readable modes: the curve peaks at -130 cents
    from showkit.analysis.features import TrackFeatures
    from showkit.analysis.scan import mode_table

    table = mode_table(load_rig())
    readable = table.freq_hz[table.readable]
    f = np.repeat(readable[[2, 4]][None, :] * 2 ** (130 / 1200), 60, axis=0)
    frames = f.shape[0]
    feats = TrackFeatures(30.0, np.ones(frames), np.ones(frames), f, np.full(f.shape, 0.5),
                          np.ones(f.shape), np.zeros((frames, 16)), np.zeros(frames))
    shifts, value = tr.shift_curve(feats, table, np.ones(frames))
    best = tr.candidates(shifts, value)[0]
    assert abs(best + 130) <= 2
    assert tr.best_shift({0.0: 10.0, 100.0: 11.0, -200.0: 30.0}) == (-200.0, 30.0)
    assert tr.best_shift({0.0: 10.0, 100.0: 11.0}) == (0.0, 10.0)  # a gain under MIN_GAIN is not suggested
    # a shift that leaves the track unreadable is no suggestion, whatever it gains
    assert tr.best_shift({0.0: 0.0, 226.0: tr.MIN_SHIFTED_SCORE - 4.0}) == (0.0, 0.0)


def test_drums_get_no_transposition(rig, tmp_path):
    """A drum kit (the synthesized demo hits, no held notes) gets no suggestion: before this rule
    the demo's kettle_parade was offered +2 st +26 c for a score of 6."""
    import soundfile as sf

    from showkit.analysis.scan import scan_track
    from showkit.demo import synth

    path = tmp_path / "hits.wav"
    sf.write(path, synth.drum_pattern(12.0, seed=2), synth.RATE_HZ)
    track = scan_track(rig, path)
    assert track["transpose_semitones"] == 0.0
    assert track["score"] <= 5.0


def test_preview_is_shifted(tmp_path):
    # librosa.effects.pitch_shift renders the preview: a 200 Hz tone shifted +2 semitones sits at 224.5 Hz
    path = tmp_path / "t.wav"
    t = np.arange(3 * RATE) / RATE
    sf.write(str(path), 0.3 * np.sin(2 * np.pi * 200.0 * t), RATE)
    out = tr.render_preview(path, 0.5, 2.5, 2.0, tmp_path / "p.wav")
    y, r = sf.read(str(out))
    assert r == RATE and abs(y.size / r - 2.0) < 0.01
    spec = np.abs(np.fft.rfft(y * np.hanning(y.size)))
    f = np.argmax(spec) * r / y.size
    assert abs(1200 * np.log2(f / (200.0 * 2 ** (2 / 12)))) < 5.0


def _work_of(features, table, seconds):
    from showkit.analysis.scan import _Work

    frames = features.frames
    return _Work(None, seconds, table, features, np.ones((frames, 2)), np.zeros(frames), [(0.0, seconds)],
                 np.zeros(0), np.ones(frames))


def test_a_knife_edge_shift_promises_what_a_real_shift_keeps():
    """Issue 12, a promise a presenter can use: notes 130 cents above mode a for 2 s, then notes above
    mode b by 130 c plus both modes' tolerances less 2 c.  Only a 3-cent sliver of shifts lays both on
    their modes (score 100 by the score's definition: the share of time held on a mode); 5 cents
    either side one half of the track is lost (score 50).  The promise is the least over the spread
    (closed form min(50, 100, 50)), not the sliver's 100; on a wide plateau (one group, its
    window's middle) it is the score itself."""
    from showkit.analysis.features import TrackFeatures
    from showkit.analysis.scan import mode_table
    from showkit.analysis.score import tolerance_cents

    table = mode_table(load_rig())
    idx = np.nonzero(table.readable)[0][[2, 4]]
    tol = tolerance_cents(table)[idx]
    cents = np.array([130.0, 130.0 + tol[0] + tol[1] - 2.0])
    f = np.full((120, 1), np.nan)
    f[:60, 0] = table.freq_hz[idx[0]] * 2 ** (cents[0] / 1200)
    f[60:, 0] = table.freq_hz[idx[1]] * 2 ** (cents[1] / 1200)
    feats = TrackFeatures(30.0, np.ones(120), np.ones(120), f, np.full(f.shape, 0.5), np.ones(f.shape),
                          np.zeros((120, 16)), np.zeros(120))
    work = _work_of(feats, table, 4.0)
    edge = -130.0 - tol[0] + 1.0   # group a at its window's lower edge + 1 c, group b 1 c inside its upper
    assert work.score_at(edge)[0] == pytest.approx(100.0, abs=1.0)
    assert work.promised_at(edge)[0] == pytest.approx(50.0, abs=2.0)
    one = _work_of(TrackFeatures(30.0, np.ones(60), np.ones(60), f[:60], np.full((60, 1), 0.5),
                                 np.ones((60, 1)), np.zeros((60, 16)), np.zeros(60)), table, 2.0)
    assert one.promised_at(-130.0)[0] == pytest.approx(one.score_at(-130.0)[0]) == pytest.approx(100.0, abs=1.0)


def test_the_promise_is_what_the_shifted_audio_scores(rig, tmp_path):
    """The demo's between-mode piece (written 2 semitones above the modes) is promised, at the scan's
    suggestion, within 5 points of what the whole track shifted by it (librosa's pitch shifter,
    :func:`render_preview`) then scores: the reference is the scan of the really shifted audio."""
    from showkit.demo_files import demo_audio_path

    path = demo_audio_path("lantern_drift.flac")
    t = scan_track(rig, path)
    assert t["transpose_semitones"] == pytest.approx(-2.0, abs=0.25)
    shifted = tr.render_preview(path, 0.0, t["duration_s"], t["transpose_semitones"], tmp_path / "s.wav")
    assert scan_track(rig, shifted)["score"] == pytest.approx(t["transpose_score"], abs=5.0)
