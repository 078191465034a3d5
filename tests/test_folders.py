"""The user's folders are worked out in one place (showkit.folders), and every user follows it.

Independent reference: the XDG Base Directory specification (``$XDG_CACHE_HOME``,
``$XDG_DATA_HOME``), which platformdirs follows on Linux; the paths below are built by
hand from the variables the test sets, not by calling platformdirs.
"""

from __future__ import annotations

import datetime as dt
import sys

import pytest

from showkit import folders
from showkit.analysis import scancache
from showkit.demo_files import user_demo_show
from showkit.show.showlog import ShowLog, default_log_path


@pytest.fixture
def no_overrides(monkeypatch, tmp_path):
    monkeypatch.delenv("SHOWKIT_CACHE_DIR", raising=False)
    monkeypatch.delenv("SHOWKIT_DATA_DIR", raising=False)
    monkeypatch.setenv("XDG_CACHE_HOME", str(tmp_path / "xdg-cache"))
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg-data"))
    return tmp_path


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="the XDG variables are Linux's")
def test_platform_folders_follow_xdg_when_no_override(no_overrides):
    tmp = no_overrides
    assert folders.cache_dir() == tmp / "xdg-cache" / "showkit"
    assert folders.data_dir() == tmp / "xdg-data" / "showkit"
    assert folders.log_dir() == tmp / "xdg-data" / "showkit" / "logs"


def test_overrides_win_and_every_user_follows_them(no_overrides, monkeypatch):
    tmp = no_overrides
    monkeypatch.setenv("SHOWKIT_CACHE_DIR", str(tmp / "c"))
    monkeypatch.setenv("SHOWKIT_DATA_DIR", str(tmp / "d"))
    assert folders.cache_dir() == tmp / "c"
    assert scancache.cache_dir() == tmp / "c" / "scan"
    assert folders.data_dir() == tmp / "d"
    assert user_demo_show() == tmp / "d" / "demo-show.toml"


def test_logs_honour_showkit_data_dir(no_overrides, monkeypatch):
    """The show log used to go to the platform folder whatever SHOWKIT_DATA_DIR said."""
    tmp = no_overrides
    monkeypatch.setenv("SHOWKIT_DATA_DIR", str(tmp / "d"))
    assert default_log_path(dt.date(2026, 3, 4)) == tmp / "d" / "logs" / "show-2026-03-04.jsonl"
    with ShowLog() as log:
        log.write("check", None, None, "x")
    assert (tmp / "d" / "logs" / f"show-{dt.date.today().isoformat()}.jsonl").is_file()
    assert not (tmp / "xdg-data").exists()
