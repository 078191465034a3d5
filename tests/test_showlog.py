"""The show log: one whole JSON object per line, synced at once, readable after a crash."""

from __future__ import annotations

import datetime as dt
import json
import os
import subprocess
import sys

import pytest

from showkit.errors import InputError
from showkit.show.showlog import EVENTS, LogError, ShowLog, default_log_path, read_log

KEYS = ["time", "event", "cue", "gain_db", "detail"]


def test_each_event_is_one_line_with_the_contract_fields(tmp_path):
    path = tmp_path / "show.jsonl"
    with ShowLog(path) as log:
        log.write("check", None, None, "static 22 Pa")
        log.write("start", "intro", -12.5, "started by the operator")
        log.write("fader", "intro", float("-inf"), "fader silent")
        # written at once: readable before close
        lines = path.read_text(encoding="utf-8").splitlines()
        assert len(lines) == 3
    records = [json.loads(line) for line in lines]
    assert [list(r) for r in records] == [KEYS] * 3
    assert records[1] == {**records[1], "event": "start", "cue": "intro", "gain_db": -12.5}
    assert records[0]["cue"] is None and records[0]["gain_db"] is None
    assert records[2]["gain_db"] is None  # -inf is not valid JSON: null
    # ISO 8601 with a UTC offset (Python's datetime.fromisoformat reads it back)
    when = dt.datetime.fromisoformat(records[0]["time"])
    assert when.tzinfo is not None
    assert abs((dt.datetime.now().astimezone() - when).total_seconds()) < 60


def test_appends_never_truncates(tmp_path):
    path = tmp_path / "show.jsonl"
    with ShowLog(path) as log:
        log.write("start", "a", 0.0, "")
    with ShowLog(path) as log:
        log.write("stop", "a", 0.0, "")
    assert [r["event"] for r in read_log(path)] == ["start", "stop"]


def test_unknown_event_is_refused(tmp_path):
    with ShowLog(tmp_path / "l.jsonl") as log:
        with pytest.raises(InputError, match="unknown show-log event"):
            log.write("jump", None, None, "")
    assert set(EVENTS) == {"check", "start", "stop", "fade", "fader", "panic", "device_error"}


def test_a_crash_leaves_every_written_line_readable(tmp_path):
    path = tmp_path / "show.jsonl"
    code = (
        "import os\n"
        "from showkit.show.showlog import ShowLog\n"
        f"log = ShowLog({str(path)!r})\n"
        "for k in range(5):\n"
        "    log.write('start', f'c{k}', -6.0, 'x' * 200)\n"
        "os._exit(9)  # die without closing or flushing anything\n"
    )
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, timeout=60)
    assert proc.returncode == 9, proc.stderr.decode()
    # and a torn last line (as a power cut might leave) is skipped, not an error
    with open(path, "ab") as fh:
        fh.write(b'{"time": "2026-01-01T00:00:00+00:00", "event": "st')
    records = read_log(path)
    assert [r["cue"] for r in records] == [f"c{k}" for k in range(5)]


def test_each_write_is_synced(tmp_path, monkeypatch):
    synced = []
    real = os.fsync
    monkeypatch.setattr(os, "fsync", lambda fd: (synced.append(fd), real(fd)))
    with ShowLog(tmp_path / "l.jsonl") as log:
        log.write("panic", None, None, "panic key")
        log.write("stop", "a", None, "panic")
    assert len(synced) == 2


def test_default_path_is_in_the_user_data_dir(monkeypatch, tmp_path):
    monkeypatch.delenv("SHOWKIT_DATA_DIR", raising=False)  # the override wins (tests/test_folders.py)
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path))  # platformdirs on Linux follows it
    path = default_log_path(dt.date(2026, 3, 4))
    assert path == tmp_path / "showkit" / "logs" / "show-2026-03-04.jsonl"
    with ShowLog() as log:
        log.write("check", None, None, "x")
    assert (tmp_path / "showkit" / "logs" / f"show-{dt.date.today().isoformat()}.jsonl").exists()


def test_unwritable_log_is_a_clear_error(tmp_path):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    with pytest.raises(LogError, match="--log FILE"):
        ShowLog(blocker / "sub" / "show.jsonl")
