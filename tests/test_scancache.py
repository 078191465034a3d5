"""The scan cache: a second scan reads it; changing the file or the rig invalidates it."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest
import soundfile as sf

from showkit.analysis import scan as scan_mod
from showkit.analysis import scancache
from showkit.demo import synth
from showkit.rigfile import load_rig


@pytest.fixture
def cache(tmp_path, monkeypatch):
    monkeypatch.setenv("SHOWKIT_CACHE_DIR", str(tmp_path / "cache"))
    return tmp_path / "cache"


@pytest.fixture
def track(tmp_path):
    path = tmp_path / "tone.wav"
    sf.write(str(path), synth.notes_track([(0.0, 4.0, synth.DEMO_MODE_HZ[4], 0.4)], 4.0), synth.RATE_HZ)
    return path


def _fail(*args, **kwargs):
    raise AssertionError("analysed again instead of read from the cache")


def test_second_scan_reads_the_cache(cache, track, monkeypatch):
    rig = load_rig()
    first = scan_mod.scan_paths(rig, [track], jobs=1)
    assert first[0]["cached"] is False and first[0]["error"] is None
    assert list((cache / "scan").glob("*.json"))
    monkeypatch.setattr(scan_mod, "scan_track", _fail)
    second = scan_mod.scan_paths(rig, [track], jobs=1)
    assert second[0]["cached"] is True
    assert second[0]["score"] == first[0]["score"] and second[0]["passages"] == first[0]["passages"]


def test_changed_content_is_analysed_again(cache, track):
    rig = load_rig()
    scan_mod.scan_paths(rig, [track], jobs=1)
    x, r = sf.read(str(track))
    sf.write(str(track), np.concatenate([x, np.zeros(100)]), r)  # same name, new content
    again = scan_mod.scan_paths(rig, [track], jobs=1)
    assert again[0]["cached"] is False


@pytest.mark.parametrize("change", [dict(static_pa=15.0), dict(reserve=0.4), dict(temperature_k=303.15)])
def test_changed_rig_is_analysed_again(cache, track, change):
    rig = load_rig()
    scan_mod.scan_paths(rig, [track], jobs=1)
    other = rig.with_conditions(**change)
    assert scancache.cache_key("x", other) != scancache.cache_key("x", rig)
    assert scan_mod.scan_paths(other, [track], jobs=1)[0]["cached"] is False


@pytest.mark.parametrize("version", ["ANALYSIS_VERSION", "SCAN_VERSION"])
def test_version_is_part_of_the_key(cache, monkeypatch, version):
    """Either version makes a cached scan stale; only ANALYSIS_VERSION stales a lock (a lock never
    reads the scan, so a scan-only change leaves the example sheets locked)."""
    import showkit
    from showkit.show.lock import sheet_rig, stale_reason
    from showkit.show.sheet import load_sheet

    rig = load_rig()
    key = scancache.cache_key("abc", rig)
    # a result of the shape a scan writes (a wrongly shaped one is ignored: issue 14)
    result = {"path": "t.wav", "duration_s": 1.0, "score": 1.0, "transpose_semitones": 0.0,
              "transpose_score": 1.0, "error": None, "passages": []}
    scancache.save(key, result)
    assert scancache.load(key) == result
    monkeypatch.setattr(showkit, version, getattr(showkit, version) + 1)
    assert scancache.cache_key("abc", rig) != key
    assert scancache.load(key) is None  # a file written by another version is stale
    if version == "SCAN_VERSION":
        sheet = load_sheet(Path(__file__).resolve().parents[1] / "cues" / "first-look.toml")
        locked = [c for c in sheet.cues if c.lock is not None]
        assert locked
        assert [stale_reason(sheet_rig(sheet), c.lock, None) for c in locked] == [None] * len(locked)


def test_broken_cache_file_is_ignored(cache):
    rig = load_rig()
    key = scancache.cache_key("abc", rig)
    (cache / "scan").mkdir(parents=True)
    (cache / "scan" / f"{key}.json").write_text("{not json")
    assert scancache.load(key) is None


def test_a_file_made_unreadable_is_not_served_from_the_cache(cache, track):
    """Scanned while readable, then made unreadable (its content and mtime unchanged): the scan
    says it cannot be read, exit 2, rather than print the cached score (a fresh user's report).
    Root reads any file, so as root the scan runs with the file-permission capabilities dropped
    (util-linux setpriv)."""
    import os
    import shutil
    import subprocess
    import sys

    rig = load_rig()
    assert scan_mod.scan_paths(rig, [track], jobs=1)[0]["error"] is None
    assert scan_mod.scan_paths(rig, [track], jobs=1)[0]["cached"] is True
    track.chmod(0)
    try:
        if os.geteuid() != 0:
            out = scan_mod.scan_paths(rig, [track], jobs=1)
            assert out[0]["error"] is not None and out[0]["cached"] is False
            return
        if shutil.which("setpriv") is None:
            pytest.skip("root without setpriv: cannot make a file unreadable")
        run = subprocess.run(["setpriv", "--bounding-set", "-dac_override,-dac_read_search",
                              sys.executable, "-m", "showkit", "scan", str(track), "--jobs", "1"],
                             capture_output=True, text=True, timeout=120,
                             env=dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[1])))
        assert run.returncode == 2, run.stdout + run.stderr
        assert "cached" not in run.stdout and "ermission denied" in run.stderr
    finally:
        track.chmod(0o644)


@pytest.mark.parametrize("field, value", [("score", float("nan")), ("transpose_score", float("inf")),
                                          ("passage score", float("nan"))])
def test_a_cached_non_finite_figure_is_analysed_again(cache, track, field, value):
    # a damaged entry with a NaN score was served, and sorting it by its rounded score raised
    import json

    rig = load_rig()
    first = scan_mod.scan_paths(rig, [track], jobs=1)[0]
    key = scancache.cache_key(scancache.content_key(track), rig)
    entry = cache / "scan" / f"{key}.json"
    data = json.loads(entry.read_text())
    if field == "passage score":
        data["result"]["passages"][0]["score"] = value
    else:
        data["result"][field] = value
    entry.write_text(json.dumps(data))
    assert scancache.load(key) is None
    again = scan_mod.scan_paths(rig, [track, track.parent], jobs=1)
    assert all(np.isfinite(t["score"]) for t in again) and again[0]["score"] == first["score"]


def test_sorting_takes_a_non_finite_score_as_none():
    tracks = [{"path": "a", "score": float("nan"), "transpose_score": float("inf"), "error": None},
              {"path": "b", "score": 3.0, "transpose_score": 3.0, "error": None}]
    assert [t["path"] for t in scan_mod.sort_tracks(tracks)] == ["b", "a"]
