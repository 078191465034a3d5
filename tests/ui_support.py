"""Helpers for the terminal-UI tests: a locked copy of the demo show in a temporary folder.

Locking the demo show takes a few seconds, so it is done once per test session
(``locked_demo_text``) and every test gets its own copy of the file.
"""

from __future__ import annotations

import shutil
from pathlib import Path

APP_SIZE = (100, 30)


def set_folders(monkeypatch, tmp_path: Path, cache: Path) -> None:
    """User folders in tmp: data (cautions marker, demo copy), cache (demo tracks), HOME."""
    monkeypatch.setenv("SHOWKIT_DATA_DIR", str(tmp_path / "data"))
    monkeypatch.setenv("SHOWKIT_CACHE_DIR", str(cache))
    monkeypatch.setenv("HOME", str(tmp_path / "home"))


def mark_cautions_read() -> None:
    from showkit.ui.safety import mark_cautions_seen

    mark_cautions_seen()


#: The demo show's sound lengths (s) -> the short demo's: the same five cues (ids, kinds, modes,
#: gains, fades, order), a quarter to a third of the sound, so that every lock, check and playback
#: render of a UI test that does not look at lengths simulates about a third of the samples.
SHORT_DEMO = {"tone = { mode = 1, duration = 8.0 }": "tone = { mode = 1, duration = 3.0 }",
              "tone = { mode = 4, duration = 12.0 }": "tone = { mode = 4, duration = 4.0 }",
              "duration = 15.0 }": "duration = 5.0 }",
              "end = 20.0": "end = 6.0"}


def lock_demo(folder: Path, short: bool = False) -> Path:
    """A locked copy of the bundled demo show in ``folder`` (``short``: with :data:`SHORT_DEMO`'s lengths)."""
    from showkit.demo_files import bundled_demo_show
    from showkit.show.lock import lock_sheet
    from showkit.show.sheet import load_sheet, save_sheet

    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "demo-show.toml"
    shutil.copyfile(bundled_demo_show(), path)
    if short:
        text = path.read_text(encoding="utf-8")
        for old, new in SHORT_DEMO.items():
            assert text.count(old) == 1, old  # the bundled demo changed: update SHORT_DEMO
            text = text.replace(old, new)
        path.write_text(text, encoding="utf-8")
    sheet = load_sheet(path)
    lock_sheet(sheet)
    save_sheet(sheet)
    return path


def make_app(sheet_path: Path, **kw):
    from showkit.ui.app import ShowkitApp
    from showkit.ui.session import Session

    return ShowkitApp(Session.open_sheet(sheet_path), **kw)


async def settle(pilot, rounds: int = 6) -> None:
    """Wait until no worker is running (workers may start more workers when they finish)."""
    import asyncio

    app = pilot.app
    for _ in range(200):  # the background work starts just after the first screen
        if app.background_started and (app.first_track is None or app.query_one("TrackView").wanted):
            break
        await asyncio.sleep(0.02)
    from textual.worker import WorkerCancelled

    for _ in range(rounds):
        try:
            await pilot.app.workers.wait_for_complete()
        except WorkerCancelled:  # a job superseded by a newer one (the app cancels it): wait on
            pass
        await pilot.pause()
        if not any(w.is_running for w in app.workers) and not app._jobs:
            await pilot.pause()
            if not any(w.is_running for w in app.workers) and not app._jobs:
                return


def sync(fn):
    """Run an async test body with asyncio (no pytest asyncio plugin needed)."""
    import asyncio
    import functools

    @functools.wraps(fn)
    def wrapper(*args, **kwargs):
        return asyncio.run(fn(*args, **kwargs))

    return wrapper
