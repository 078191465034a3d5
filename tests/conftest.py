"""Shared pytest fixtures (keep generic and small; add fixtures with small edits)."""

from __future__ import annotations

import os
import shutil
import tempfile

import pytest

_OWN_FOLDERS: list[str] = []


def pytest_configure(config):
    """The tests never read or write the user's own showkit cache and data folders.

    Each test process (each xdist worker too) gets its own temporary folders
    unless the caller set ``SHOWKIT_CACHE_DIR``/``SHOWKIT_DATA_DIR``; tests that
    need a folder of their own still set it themselves.
    """
    for name in ("SHOWKIT_CACHE_DIR", "SHOWKIT_DATA_DIR"):
        if not os.environ.get(name):
            folder = tempfile.mkdtemp(prefix=f"showkit-tests-{name[8:12].lower()}-")
            _OWN_FOLDERS.append(folder)
            os.environ[name] = folder


def pytest_unconfigure(config):
    for folder in _OWN_FOLDERS:
        shutil.rmtree(folder, ignore_errors=True)


@pytest.fixture
def write_rig(tmp_path):
    """Factory: ``write_rig(text, name="rig.toml")`` writes a rig file in tmp_path, returns its Path."""

    def _write(text: str, name: str = "rig.toml"):
        path = tmp_path / name
        path.write_text(text, encoding="utf-8")
        return path

    return _write


@pytest.fixture(scope="session")
def air_20c():
    """Dry air at 20 C and 101 325 Pa (the gas of the openwind reference tubes)."""
    from showkit.physics.gas import gas_state

    return gas_state("air", 0.0, 293.15)


@pytest.fixture(scope="session")
def ui_cache(tmp_path_factory):
    """One cache folder for the UI tests (the demo tracks are synthesized into it once)."""
    return tmp_path_factory.mktemp("showkit-cache")


def _locked_demo(tmp_path_factory, ui_cache, short: bool) -> str:
    import os

    from ui_support import lock_demo

    old = os.environ.get("SHOWKIT_CACHE_DIR")
    os.environ["SHOWKIT_CACHE_DIR"] = str(ui_cache)
    try:
        return lock_demo(tmp_path_factory.mktemp("locked-demo"), short).read_text(encoding="utf-8")
    finally:
        if old is None:
            os.environ.pop("SHOWKIT_CACHE_DIR", None)
        else:
            os.environ["SHOWKIT_CACHE_DIR"] = old


@pytest.fixture(scope="session")
def locked_demo_text(tmp_path_factory, ui_cache):
    """The demo show, locked on the demo rig, as TOML text (made once per test session)."""
    return _locked_demo(tmp_path_factory, ui_cache, False)


@pytest.fixture(scope="session")
def locked_short_demo_text(tmp_path_factory, ui_cache):
    """The short demo show (ui_support.SHORT_DEMO), locked on the demo rig, as TOML text (once per session)."""
    return _locked_demo(tmp_path_factory, ui_cache, True)


def _ui_show(tmp_path, monkeypatch, ui_cache, text):
    from ui_support import mark_cautions_read, set_folders

    set_folders(monkeypatch, tmp_path, ui_cache)
    mark_cautions_read()
    path = tmp_path / "show.toml"
    path.write_text(text, encoding="utf-8")
    return path


@pytest.fixture
def ui_show(tmp_path, monkeypatch, ui_cache, locked_demo_text):
    """A locked demo show in tmp_path (user folders in tmp, cautions already read); its Path."""
    return _ui_show(tmp_path, monkeypatch, ui_cache, locked_demo_text)


@pytest.fixture
def ui_short_show(tmp_path, monkeypatch, ui_cache, locked_short_demo_text):
    """As ``ui_show`` with the short demo show (same cues, a third of the sound: for the tests whose
    checks do not depend on the cues' lengths -- each lock, check and render simulates less)."""
    return _ui_show(tmp_path, monkeypatch, ui_cache, locked_short_demo_text)


@pytest.fixture(scope="session")
def realmusic(tmp_path_factory):
    """The real-music test set (tests/realmusic.py), rendered once per session into a tmp folder."""
    import realmusic as rm

    missing = rm.have_tools()
    if missing:  # CI installs them (.ci/run); say what is missing rather than fail obscurely
        pytest.fail(f"real-music corpus cannot be rendered: {missing}")
    return rm.build(tmp_path_factory.mktemp("realmusic"))
