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


#: The test files that take longest, longest first (per-file totals of ``pytest --durations=0``, measured
#: 2026-12-03): pytest-xdist hands whole files to the workers in the collection's order
#: (pyproject: ``--dist loadfile --no-loadscope-reorder``), so the long ones start first and the
#: last files to start are short -- no worker is left with a long file while the other is idle.
#: test_scan_realmusic.py starts early, out of turn: it renders the real-music set, which
#: test_realmusic_set.py, later, then reads (conftest ``realmusic``).  Files not named here follow
#: in their usual order.
LONGEST_FIRST = ("test_ui_run.py", "test_scan_realmusic.py", "test_family.py", "test_measure.py",
                 "test_bad_numbers.py", "test_ui_tube_track.py", "test_ui_show.py", "test_lock_render.py",
                 "test_cli_sheet.py", "test_realmusic_set.py", "test_export_book.py", "test_kill_lock.py",
                 "test_ui_exports.py", "test_ui_measure.py", "test_ui_review.py", "test_bad_inputs.py",
                 "test_ui_snapshots.py", "test_lock_memo.py", "test_sheet_properties.py", "test_export_figures.py",
                 "test_cli_ceiling.py", "test_export_preview.py", "test_run_cmd.py", "test_signal_memo.py",
                 "test_cli_scan.py")


def pytest_xdist_auto_num_workers(config):
    """``-n auto``: one worker more than the cores.

    The suite waits as well as computes (the UI tests' timers and pauses, the subprocesses of
    the command-line and kill tests), and a third worker fills those waits: on 2 idle cores the
    whole suite took 453 s with 3 workers against 497 s with 2 (2026-12-03, one run each).
    """
    return (os.cpu_count() or 1) + 1


def pytest_collection_modifyitems(config, items):
    """The files of :data:`LONGEST_FIRST` first, in that order (a file's tests keep theirs)."""
    rank = {name: i for i, name in enumerate(LONGEST_FIRST)}
    items.sort(key=lambda item: rank.get(item.path.name, len(rank)))


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
    """The locked demo show's text, locked once per session for all xdist workers (tests/shared_work.py)."""
    import os

    from shared_work import locked, session_folder
    from ui_support import lock_demo

    folder = session_folder(tmp_path_factory, "locked-demo-short" if short else "locked-demo")
    old = os.environ.get("SHOWKIT_CACHE_DIR")
    os.environ["SHOWKIT_CACHE_DIR"] = str(ui_cache)
    try:
        with locked(folder / "lock.lock"):
            done = folder / "locked.toml"
            if not done.exists():
                text = lock_demo(folder / "work", short).read_text(encoding="utf-8")
                done.with_suffix(".part").write_text(text, encoding="utf-8")
                done.with_suffix(".part").replace(done)
            return done.read_text(encoding="utf-8")
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
    """The real-music test set (tests/realmusic.py), rendered once per session into a tmp folder that the
    session's xdist workers share (tests/shared_work.py): the first to ask renders it, the others wait and
    read it."""
    import realmusic as rm
    from shared_work import locked, session_folder

    missing = rm.have_tools()
    if missing:  # CI installs them (.ci/run); say what is missing rather than fail obscurely
        pytest.fail(f"real-music corpus cannot be rendered: {missing}")
    folder = session_folder(tmp_path_factory, "realmusic")
    with locked(folder / "build.lock"):
        return rm.build(folder)
