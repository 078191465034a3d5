"""The show log: one JSON object per line, each written whole and synced at once.

Every pre-show reading, cue start and stop, fader move, fade, panic and device
error of a live show is appended to the log as it happens::

    {"time": "2026-12-01T19:40:02.125+00:00", "event": "start", "cue": "intro",
     "gain_db": -6.0, "detail": "started on a go (the operator, or --auto)"}

``time`` is ISO 8601 with the local UTC offset; ``event`` is one of
:data:`EVENTS`; ``cue`` is the cue's id or null; ``gain_db`` is the drive gain in
dB that was in force (the cue's locked gain plus the operator fader) or null;
``detail`` is plain text.

Each line is written with a single ``os.write`` on a file opened for appending
and then ``os.fsync``'d, so a crash or a power cut leaves every earlier line
whole and readable (:func:`read_log` also skips a torn last line, should the
operating system ever leave one).  The log is written from the operator's
thread, never from the audio callback.

The default file is ``<user data folder>/logs/show-<YYYY-MM-DD>.jsonl``, with the
user data folder from :func:`showkit.folders.data_dir` (``SHOWKIT_DATA_DIR`` when set,
else ``~/.local/share/showkit`` on Linux).
"""

from __future__ import annotations

import datetime as _dt
import json
import math
import os
import stat
from pathlib import Path

from showkit.errors import InputError, ShowkitError
from showkit.fileio import open_log
from showkit.folders import log_dir
from showkit.safesave import check_target

EVENTS = ("check", "start", "stop", "fade", "fader", "panic", "device_error")


class LogError(ShowkitError):
    """The show log cannot be opened or written."""


def default_log_path(date: _dt.date | None = None) -> Path:
    """The default log file for ``date`` (today when None) in the logs folder of the user's data folder."""
    date = date or _dt.date.today()
    return log_dir() / f"show-{date.isoformat()}.jsonl"


def now_iso() -> str:
    """The current local time, ISO 8601 with milliseconds and the UTC offset."""
    return _dt.datetime.now().astimezone().isoformat(timespec="milliseconds")


def log_line(event: str, cue: str | None = None, gain_db: float | None = None,
             detail: str = "", time: str | None = None) -> str:
    """One log record as a JSON line (with the trailing newline).

    Parameters
    ----------
    event : str
        One of :data:`EVENTS`.
    cue : str or None
        The cue id the event is about.
    gain_db : float or None
        Drive gain in dB in force; non-finite values (a fader at zero) are written as null.
    detail : str
        Plain-text detail.
    time : str, optional
        ISO 8601 time; now when omitted.
    """
    if event not in EVENTS:
        raise InputError(f"unknown show-log event {event!r}", "show log",
                         f"use one of {', '.join(EVENTS)}")
    if gain_db is not None:
        gain_db = float(gain_db)
        gain_db = round(gain_db, 3) if math.isfinite(gain_db) else None
    record = {"time": time or now_iso(), "event": event,
              "cue": None if cue is None else str(cue), "gain_db": gain_db,
              "detail": str(detail)}
    return json.dumps(record, ensure_ascii=False) + "\n"


class ShowLog:
    """An append-only show log file.

    Parameters
    ----------
    path : str or Path, optional
        The log file; :func:`default_log_path` when None.  Its folder is made
        if missing.  An existing file is appended to, never truncated.
    """

    def __init__(self, path: str | Path | None = None, protect=()):
        self._fd = None
        self.path = Path(path) if path is not None else default_log_path()
        try:
            self.path.parent.mkdir(parents=True, exist_ok=True)
            check_target(self.path, protect, "show log")  # not a folder, pipe, device or show file
            # O_NONBLOCK: a named pipe planted at the path must not hang the show
            flags = (os.O_WRONLY | os.O_APPEND | os.O_CREAT | getattr(os, "O_NONBLOCK", 0)
                     | getattr(os, "O_NOCTTY", 0))
            fd = os.open(self.path, flags, 0o644)
        except ShowkitError as exc:
            raise LogError(exc.what, exc.where, "give a regular file with --log FILE") from None
        except OSError as exc:
            raise LogError(f"cannot open the show log ({exc.strerror or exc})", str(self.path),
                           "give a writable file with --log FILE") from None
        try:
            if not stat.S_ISREG(os.fstat(fd).st_mode):
                raise LogError("is not a regular file, not a show log", str(self.path),
                               "give a regular file with --log FILE")
            os.set_blocking(fd, True)
        except BaseException:
            os.close(fd)
            raise
        self._fd = fd
        self.count = 0

    def write(self, event: str, cue: str | None = None, gain_db: float | None = None,
              detail: str = "") -> dict:
        """Append one event, whole, and sync it to disk; returns the record written."""
        line = log_line(event, cue, gain_db, detail)
        data = line.encode("utf-8")
        if self._fd is None:
            raise LogError("the show log is closed", str(self.path), "open a new ShowLog")
        try:
            written = os.write(self._fd, data)
            while written < len(data):  # a short write to a regular file is rare; finish it
                written += os.write(self._fd, data[written:])
            os.fsync(self._fd)
        except OSError as exc:
            raise LogError(f"cannot write the show log ({exc.strerror or exc})", str(self.path),
                           "free some disk space or give another file with --log FILE") from None
        self.count += 1
        return json.loads(line)

    def close(self) -> None:
        if self._fd is not None:
            os.close(self._fd)
            self._fd = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()


def read_log(path: str | Path) -> list[dict]:
    """Every whole record in a show log, in order; a torn or garbled line is skipped.

    The log is read through :func:`showkit.fileio.open_log`: a regular file of at
    most :data:`showkit.limits.LOG_MAX_BYTES`, or one :class:`LogError` line.
    """
    records = []
    with open_log(path, LogError) as fh:
        for raw in fh:
            if not raw.endswith(b"\n"):
                continue  # the last line of a crash, cut short: not a whole record
            try:
                record = json.loads(raw.decode("utf-8"))
            except (UnicodeDecodeError, json.JSONDecodeError):
                continue
            if isinstance(record, dict) and record.get("event") in EVENTS:
                records.append(record)
    return records
