"""Expensive test material made once per test session and shared by the pytest-xdist workers.

A session fixture is built once per worker process; the real-music set (tests/realmusic.py,
rendered with fluidsynth) is worth sharing between the workers instead, so that the test files
that use it can run on different workers.  The work is guarded by an exclusive lock file
(``fcntl.flock``, released by the kernel when a worker dies): the first worker to take it does
the work and leaves the result in the folder; the others wait for the lock and read the result.

The folder is the session's own (under xdist, the parent of the worker's basetemp, which only the
workers of this session share; without xdist, the session's basetemp): nothing is reused from an
earlier session.
"""

from __future__ import annotations

import fcntl
import os
from contextlib import contextmanager
from pathlib import Path


def session_folder(tmp_path_factory, name: str) -> Path:
    """A folder of this test session that all its xdist workers see (created if needed)."""
    base = tmp_path_factory.getbasetemp()
    if os.environ.get("PYTEST_XDIST_WORKER"):
        base = base.parent
    folder = base / name
    folder.mkdir(parents=True, exist_ok=True)
    return folder


@contextmanager
def locked(path: Path):
    """Hold the exclusive lock file ``path`` (waiting for another process to let it go)."""
    with open(path, "a") as fh:
        fcntl.flock(fh, fcntl.LOCK_EX)
        try:
            yield
        finally:
            fcntl.flock(fh, fcntl.LOCK_UN)
