"""Bounded work (issue 14): what is held in memory stays bounded for any accepted input."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf
from hypothesis import given, settings
from hypothesis import strategies as st
from hypothesis.extra.numpy import arrays

from showkit import limits
from showkit.analysis import segments as sg
from showkit.errors import AudioError, MeasureError


@settings(max_examples=60, deadline=None)
@given(arrays(np.float64, st.tuples(st.integers(0, 80), st.integers(1, 6)),
              elements=st.floats(-5, 5)), st.integers(2, 12))
def test_banded_novelty_equals_the_full_matrix(blocks, half):
    # the reference is Foote's novelty on the whole similarity matrix (Foote, ICME 2000)
    full = sg.novelty(sg.self_similarity(blocks), half) if blocks.shape[0] else np.zeros(0)
    banded = sg.novelty_from_blocks(blocks, half)
    assert banded.shape == full.shape
    assert np.allclose(banded, full, atol=1e-12)


def test_novelty_of_a_three_hour_track_needs_no_square_matrix():
    import tracemalloc

    blocks = np.random.default_rng(3).normal(size=(3 * 3600 * 4, 9))  # 4 blocks a second
    tracemalloc.start()
    sg.novelty_from_blocks(blocks, 12)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    assert peak < 50e6  # the full matrix would be 15 GB


@pytest.mark.parametrize("rate, length, match", [(20_000_000, 60.0, "sample rate"), (100, 5.0, "sample rate"),
                                                 (384_000, 600.0, "more than showkit makes"),
                                                 (48000, float("nan"), "finite")])
def test_sweeps_are_bounded(rate, length, match):
    from showkit.analysis.sweep import SweepSpec, check_spec

    with pytest.raises(MeasureError, match=match):
        check_spec(SweepSpec(20.0, 1000.0, length, rate, 0.5))


def test_a_passage_longer_than_the_memory_budget_is_one_line(tmp_path, monkeypatch):
    from showkit.analysis import audio

    path = tmp_path / "a.wav"
    sf.write(path, np.zeros(48000), 48000)
    monkeypatch.setattr(audio, "MAX_CUE_SAMPLES", 1000)
    with pytest.raises(AudioError, match="more than showkit holds"):
        audio.load_audio(path)
    assert audio.load_audio(path, None, 0.0, 0.02).samples.size == 960


def test_the_limits_keep_a_cue_under_two_gigabytes():
    # float64 samples with the handful of copies locking makes (measured: 1.2 GB at the limit)
    assert limits.MAX_CUE_SAMPLES * 8 * 5 < 2e9
    assert limits.MAX_GENERATED_S * 48000 <= limits.MAX_CUE_SAMPLES
    assert limits.MAX_SHOW_SAMPLES * 4 < 2e9
