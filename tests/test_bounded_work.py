"""Bounded work (issue 14): what is held in memory stays bounded for any accepted input."""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

from showkit import limits
from showkit.analysis import segments as sg
from showkit.errors import AudioError, MeasureError


# The banded novelty equals the full matrix's: tests/test_segments.py (hypothesis).


def test_novelty_of_a_three_hour_track_needs_no_square_matrix():
    import tracemalloc

    blocks = np.random.default_rng(3).normal(size=(3 * 3600 * 4, 9))  # 4 blocks a second
    tracemalloc.start()
    sg.banded_novelty(blocks, 12)
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


def _sparse_wav(path, seconds: float, rate: int = 8000) -> None:
    """A 16-bit mono WAV of ``seconds`` of silence, written as a sparse file (no disk used)."""
    import struct

    data_bytes = int(seconds * rate) * 2
    fmt = struct.pack("<HHIIHH", 1, 1, rate, rate * 2, 2, 16)
    header = (b"RIFF" + struct.pack("<I", 4 + 8 + len(fmt) + 8 + data_bytes) + b"WAVE"
              + b"fmt " + struct.pack("<I", len(fmt)) + fmt + b"data" + struct.pack("<I", data_bytes))
    with open(path, "wb") as f:
        f.write(header)
        f.truncate(len(header) + data_bytes)


def test_a_three_hour_track_works_where_it_streams(tmp_path, monkeypatch, capsys):
    from showkit.cli.main import main

    monkeypatch.setenv("SHOWKIT_CACHE_DIR", str(tmp_path / "cache"))
    track = tmp_path / "long.wav"
    _sparse_wav(track, 3 * 3600)
    # a passage deep inside it: only that passage is read
    assert main(["ceiling", str(track), "--start", "2:59:00", "--end", "2:59:20"]) == 0
    sheet = tmp_path / "s.toml"
    sheet.write_text('title = "t"\nrig = "demo"\nformat = 1\n[[cue]]\nid = "late"\naudio = "long.wav"\n'
                     'start = "1:30:00"\nend = "1:30:10"\ngain = -20\n')
    assert main(["lock", str(sheet)]) == 0
    # a whole-track scan is refused in its row with one line, not run out of memory
    capsys.readouterr()
    assert main(["scan", str(track), "--jobs", "1"]) == 2
    assert "more than a scan analyses in one piece" in capsys.readouterr().err  # one file: its one line
    # and the whole track as one cue is refused: it would be held in memory
    sheet.write_text('title = "t"\nrig = "demo"\nformat = 1\n[[cue]]\nid = "all"\naudio = "long.wav"\n')
    assert main(["lock", str(sheet)]) == 2
    assert "more than showkit holds in memory" in capsys.readouterr().err
