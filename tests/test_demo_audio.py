"""The demo pieces: remade identically, within the size and length limits, ranked as designed."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from showkit.demo import synth

DEMO = Path(__file__).resolve().parent.parent / "demo_audio"


def test_files_are_there_and_small():
    sizes = 0
    for piece in synth.PIECES.values():
        path = DEMO / piece.filename
        assert path.is_file(), f"run python -m showkit.demo.synth demo_audio ({path})"
        info = sf.info(str(path))
        assert info.samplerate in (44100, 48000)
        assert info.duration <= 40.0  # issue 4: each piece at most 40 s
        assert abs(info.duration - piece.duration_s) < 0.01
        sizes += path.stat().st_size
    assert sizes < 5_000_000  # issue 4: under 5 MB in all


def test_remade_identically(tmp_path):
    # determinism: a fresh render decodes to the very samples of the committed files
    fresh = synth.write_demo_audio(tmp_path)
    for path in fresh:
        a, ra = sf.read(str(path), dtype="int16")
        b, rb = sf.read(str(DEMO / path.name), dtype="int16")
        assert ra == rb and np.array_equal(a, b), path.name


def test_frozen_modes_match_the_rig():
    # the on-mode pieces are written on frozen frequencies: they must still be the rig's modes
    from showkit.physics.modes import find_modes
    from showkit.rigfile import load_rig

    modes = {m.n: m for m in find_modes(load_rig().model)}
    for n, f in synth.DEMO_MODE_HZ.items():
        assert abs(1200 * np.log2(f / modes[n].frequency_hz)) < 2.0
        assert modes[n].pattern == "readable"


def test_between_modes_piece_really_is_between():
    shift = 2 ** (synth.DRIFT_OFFSET_SEMITONES / 12)
    modes = np.array(sorted(synth.DEMO_MODE_HZ.values()))
    for n in synth.DRIFT_MODES:
        f = synth.DEMO_MODE_HZ[n] * shift
        assert np.min(np.abs(1200 * np.log2(f / modes))) > 50.0


@pytest.fixture(scope="module")
def ranked():
    from showkit.analysis.scan import scan_paths
    from showkit.rigfile import load_rig

    return scan_paths(load_rig(), [DEMO], jobs=2, use_cache=False)  # no cache: nothing written


def test_demo_ranks_as_designed(ranked):
    order = [Path(t["path"]).stem for t in ranked]
    first, second, rest = synth.EXPECTED_ORDER
    assert order[0] == first and order[1] == second
    assert set(order[2:]) == set(rest)
    score = {Path(t["path"]).stem: t["score"] for t in ranked}
    # issue 13: on the flowing-gas best estimate the modes are broad and the gap narrowed
    # (36.4 against 31.0; it was more than 10 points with still gas)
    assert score[first] > score[second] + 4
    assert score[second] > max(score[r] for r in rest) + 20


def test_demo_sections_and_modes(ranked):
    track = {Path(t["path"]).stem: t for t in ranked}
    rooms = track["three_rooms"]
    edges = [p["start_s"] for p in rooms["passages"][1:]]
    for truth in synth.PIECES["three_rooms"].sections_s:
        assert min(abs(e - truth) for e in edges) <= 1.0  # issue 4: within 1 s
    # the pad section is the best passage and hits the modes it is written on
    best = max(rooms["passages"], key=lambda p: p["score"])
    assert best["end_s"] <= 13.0
    assert set(best["modes"]) <= set(synth.PIECES["three_rooms"].modes)
    ember_modes = {n for p in track["ember_steps"]["passages"] for n in p["modes"]}
    assert ember_modes == set(synth.PIECES["ember_steps"].modes)
    assert track["lantern_drift"]["transpose_semitones"] == -synth.DRIFT_OFFSET_SEMITONES
