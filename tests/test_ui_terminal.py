"""`showkit` in a real terminal: tmux runs it, capture-pane reads the first screen, ctrl+q quits."""

from __future__ import annotations

import shutil
import subprocess
import sys
import time
import uuid
from pathlib import Path

import pytest

pytestmark = pytest.mark.skipif(shutil.which("tmux") is None, reason="tmux is not installed")


def _capture(name: str) -> str:
    return subprocess.run(["tmux", "capture-pane", "-p", "-t", name], capture_output=True, text=True).stdout


def _wait_for(name: str, words: list[str], timeout_s: float) -> str:
    end = time.monotonic() + timeout_s
    screen = ""
    while time.monotonic() < end:
        screen = _capture(name)
        if all(w in screen for w in words):
            return screen
        time.sleep(0.2)
    return screen


def test_showkit_in_tmux_draws_the_demo_show_and_quits(tmp_path, ui_cache):
    name = f"showkit-test-{uuid.uuid4().hex[:8]}"
    data = tmp_path / "data"
    done = tmp_path / "exit-status"
    env = {"HOME": str(tmp_path / "home"), "SHOWKIT_DATA_DIR": str(data),
           "SHOWKIT_CACHE_DIR": str(ui_cache), "TERM": "xterm-256color",
           "PYTHONPATH": str(Path(__file__).resolve().parent.parent)}
    exports = " ".join(f"{k}={v!s}" for k, v in env.items())
    command = f"env {exports} {sys.executable} -m showkit; echo $? > {done}"
    for attempt in range(10):  # a tmux server that is just exiting refuses new sessions
        started = subprocess.run(["tmux", "new-session", "-d", "-s", name, "-x", "100", "-y", "30", command])
        if started.returncode == 0:
            break
        time.sleep(0.3)
    assert started.returncode == 0, "tmux could not start a session"
    try:
        # first start: the safety cautions come first
        screen = _wait_for(name, ["Safety first"], 60)
        assert "Safety first" in screen and "planning aid" in screen
        subprocess.run(["tmux", "send-keys", "-t", name, "Enter"], check=True)
        screen = _wait_for(name, ["Demo show: flames that sing", "welcome", "mode-4", "steps"], 30)
        for word in ("Demo show: flames that sing", "welcome", "talk", "mode-4", "climb", "steps",
                     "gain", "ceiling", "headroom", "CAUTION"):
            assert word in screen, f"{word!r} not on the screen:\n{screen}"
        assert "Traceback" not in screen
        subprocess.run(["tmux", "send-keys", "-t", name, "C-q"], check=True)
        end = time.monotonic() + 20
        while time.monotonic() < end and not done.exists():
            time.sleep(0.2)
        assert done.exists(), "showkit did not quit on ctrl+q"
        assert done.read_text().strip() == "0"
        # the user's copy of the demo show was made and saved; the cautions were remembered
        assert (data / "demo-show.toml").exists()
        assert (data / "cautions-read").exists()
    finally:
        subprocess.run(["tmux", "kill-session", "-t", name], capture_output=True)
