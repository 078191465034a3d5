"""One way in: every file showkit reads is opened here, by kind.

:func:`open_checked` opens a path without blocking (a named pipe would
otherwise wait forever for a writer), and accepts only a regular file
within the size limit of its kind (:mod:`showkit.limits`); a named pipe, a
device, a socket or a folder gets one line saying so.  The readers per kind:

* :func:`read_rig_text` and :func:`read_text` (cue sheets) -- TOML text, parsed
  by :func:`parse_toml`, which bounds nesting;
* :func:`check_audio_file` -- the checks before libsndfile opens an audio file
  (the decoding itself streams, in :mod:`showkit.analysis.audio`);
* :func:`open_log` -- the show log, read back line by line;
* :func:`read_json` -- scan-cache entries (``None`` for anything unusable).
"""

from __future__ import annotations

import errno
import json
import os
import stat
import sys
import threading
import tomllib
from contextlib import contextmanager
from pathlib import Path

from showkit import limits
from showkit.errors import ShowkitError

_KIND_LIMIT = {"rig file": limits.RIG_MAX_BYTES, "cue sheet": limits.SHEET_MAX_BYTES,
               "show log": limits.LOG_MAX_BYTES, "cache entry": limits.CACHE_MAX_BYTES,
               "audio file": limits.AUDIO_MAX_BYTES}


def _what_it_is(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a folder"
    if stat.S_ISFIFO(mode):
        return "a named pipe"
    if stat.S_ISCHR(mode):
        return "a character device"
    if stat.S_ISBLK(mode):
        return "a block device"
    if stat.S_ISSOCK(mode):
        return "a socket"
    return "not a regular file"


def _human(n: int) -> str:
    for unit, size in (("GB", 1 << 30), ("MB", 1 << 20), ("kB", 1 << 10)):
        if n >= size:
            return f"{n / size:.1f} {unit}"
    return f"{n} bytes"


def _a(kind: str) -> str:
    return ("an " if kind[:1] in "aeiou" else "a ") + kind


def check_kind(st: os.stat_result, path, kind: str, error: type[ShowkitError]) -> None:
    """Refuse anything but a regular file within the size limit of ``kind``."""
    if not stat.S_ISREG(st.st_mode):
        fix = (f"give the path of {_a(kind)}" if stat.S_ISDIR(st.st_mode)
               else f"give a regular {kind}; showkit does not read pipes or devices")
        raise error(f"is {_what_it_is(st.st_mode)}, not {_a(kind)}", str(path), fix)
    limit = _KIND_LIMIT[kind]
    if st.st_size > limit:
        raise error(f"the {kind} is {_human(st.st_size)}, more than showkit reads ({_human(limit)})",
                    str(path), "check that this is the right file (see Limits in the README)")


def open_checked(path, kind: str, error: type[ShowkitError], missing_fix: str = "check the path"):
    """A binary file object of ``path``, a regular file within the size limit of ``kind``.

    Opened with ``O_NONBLOCK`` so that a named pipe is refused at once instead of
    waiting for a writer; the flag is cleared again for the regular file.
    """
    path = Path(path)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
    try:
        fd = os.open(path, flags)
    except FileNotFoundError:
        raise error(f"no such {kind}", str(path), missing_fix) from None
    except IsADirectoryError:
        raise error(f"is a folder, not {_a(kind)}", str(path), f"give the path of {_a(kind)}") from None
    except OSError as exc:
        if exc.errno == errno.ENXIO:  # a socket or a pipe with no writer on some systems
            raise error(f"is not a regular file, not {_a(kind)}", str(path),
                        f"give a regular {kind}") from None
        raise error(f"cannot open the {kind} ({exc.strerror or exc.__class__.__name__})", str(path),
                    "check that it exists and that you may read it") from None
    try:
        st = os.fstat(fd)
        check_kind(st, path, kind, error)
        if hasattr(os, "O_NONBLOCK"):
            os.set_blocking(fd, True)
        return os.fdopen(fd, "rb")
    except BaseException:
        os.close(fd)
        raise


def read_bytes(path, kind: str, error: type[ShowkitError], missing_fix: str = "check the path") -> bytes:
    """The bytes of a regular file of ``kind`` (never more than its size limit)."""
    limit = _KIND_LIMIT[kind]
    with open_checked(path, kind, error, missing_fix) as f:
        try:
            data = f.read(limit + 1)
        except OSError as exc:
            raise error(f"cannot read the {kind} ({exc.strerror or exc.__class__.__name__})", str(path),
                        "check the file and the disk") from None
    if len(data) > limit:  # it grew while being read
        raise error(f"the {kind} is more than showkit reads ({_human(limit)})", str(path),
                    "check that this is the right file (see Limits in the README)")
    return data


def read_text(path, kind: str, error: type[ShowkitError], missing_fix: str = "check the path") -> str:
    """The UTF-8 text of a regular file of ``kind``, or ``error`` in one line."""
    data = read_bytes(path, kind, error, missing_fix)
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[:exc.start].count(b"\n") + 1
        raise error(f"the {kind} is not UTF-8 text (a byte that is not UTF-8 on line {line})", str(path),
                    f"check that it is {_a(kind)}, saved as UTF-8 text") from None


def read_rig_text(path, error, missing_fix: str) -> str:
    """The text of a rig file (regular file, at most :data:`showkit.limits.RIG_MAX_BYTES`)."""
    return read_text(path, "rig file", error, missing_fix)


def check_audio_file(path, error) -> os.stat_result:
    """Check that ``path`` is a regular audio file within the size limit; its ``stat``."""
    with open_checked(path, "audio file", error, "check the path") as f:
        return os.fstat(f.fileno())


def open_log(path, error):
    """The show log opened for reading (regular file within :data:`showkit.limits.LOG_MAX_BYTES`)."""
    return open_checked(path, "show log", error, "check the path of the log")


def nesting_depth(value, limit: int = limits.MAX_NESTING) -> int:
    """How deeply lists and dicts nest in ``value`` (iterative; stops counting past ``limit``)."""
    deepest = 0
    stack = [(value, 1)]
    while stack:
        item, depth = stack.pop()
        if isinstance(item, dict):
            children = item.values()
        elif isinstance(item, list):
            children = item
        else:
            continue
        deepest = max(deepest, depth)
        if deepest > limit:
            return deepest
        stack.extend((child, depth + 1) for child in children)
    return deepest


def parse_toml(text: str, where: str, error: type[ShowkitError]) -> dict:
    """Parse TOML; a syntax error or too deep nesting becomes ``error`` in one line."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise error(f"TOML syntax error: {exc}", where,
                    "fix the line shown (quote strings, one key = value per line)") from None
    except RecursionError:
        raise error(f"arrays or tables nest too deeply (showkit reads at most {limits.MAX_NESTING} levels)",
                    where, "check the file: showkit's own files nest 3 levels") from None
    if nesting_depth(data) > limits.MAX_NESTING:
        raise error(f"arrays or tables nest too deeply (showkit reads at most {limits.MAX_NESTING} levels)",
                    where, "check the file: showkit's own files nest 3 levels")
    return data


class _Unusable(ShowkitError):
    pass


def read_json(path):
    """A JSON file of the scan cache, or ``None`` when it is missing, unusable or too big/deep."""
    try:
        data = read_bytes(path, "cache entry", _Unusable)
        value = json.loads(data.decode("utf-8"))
    except (_Unusable, ValueError, RecursionError):
        return None
    if nesting_depth(value) > limits.MAX_NESTING:
        return None
    return value


#: Whether :func:`quiet_native_stderr` silences file descriptor 2 (the command line turns it on,
#: :func:`quiet_native_probes`; the terminal UI draws through that descriptor and never does).
_QUIET_PROBES = False
_QUIET_LOCK = threading.Lock()


def quiet_native_probes(on: bool = True) -> None:
    """Silence the C libraries' own lines on standard error while a file's format is probed
    (for the command line, whose standard error carries only showkit's one-line messages)."""
    global _QUIET_PROBES
    _QUIET_PROBES = bool(on)


@contextmanager
def quiet_native_stderr():
    """Standard error (file descriptor 2) to the null device for the block, when
    :func:`quiet_native_probes` is on: libsndfile's mp3 decoder prints its own lines there while
    it probes an unknown file ("skip_junk(): Giving up"), which stood before showkit's one line.
    One probe at a time (a lock): descriptor 2 is the process's, shared by its threads."""
    if not _QUIET_PROBES:
        yield
        return
    with _QUIET_LOCK:
        try:
            sys.stderr.flush()
        except (OSError, ValueError, AttributeError):
            pass
        try:
            saved = os.dup(2)
        except OSError:                  # no descriptor 2 (closed): nothing to silence
            yield
            return
        try:
            null = os.open(os.devnull, os.O_WRONLY)
        except OSError:
            os.close(saved)
            yield
            return
        try:
            os.dup2(null, 2)
            yield
        finally:
            os.dup2(saved, 2)
            os.close(saved)
            os.close(null)
