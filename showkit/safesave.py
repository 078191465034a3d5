"""Saving files so that nothing is lost: temporary file, fsync, backup, rename.

Every file showkit writes (cue sheets, rig updates, rendered audio, cache
entries) goes through here.  The new content is written to a temporary file
in the same folder and synced; the previous version is kept as ``NAME.bak``
(older ones as ``NAME.bak.1`` ...); then the temporary file is renamed over
the target, which is atomic on POSIX file systems, and the folder is synced.
A new file gets the usual permissions (``0666`` less the umask); a replaced
file keeps its own.
"""

from __future__ import annotations

import contextlib
import os
import shutil
import stat
import tempfile
from pathlib import Path


def _mode_for(path: Path) -> int:
    try:
        return stat.S_IMODE(path.stat().st_mode)
    except FileNotFoundError:
        umask = os.umask(0)
        os.umask(umask)
        return 0o666 & ~umask


def _fsync_folder(folder: Path) -> None:
    try:
        fd = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def keep_backup(path: Path, backups: int = 1) -> Path | None:
    """Copy ``path`` to ``path.bak`` (rotating ``.bak.1`` .. up to ``backups`` in all)."""
    path = Path(path)
    if backups <= 0 or not path.exists():
        return None
    bak = path.with_name(path.name + ".bak")
    if backups > 1 and bak.exists():
        for k in range(backups - 2, 0, -1):
            older = path.with_name(f"{path.name}.bak.{k}")
            if older.exists():
                older.replace(path.with_name(f"{path.name}.bak.{k + 1}"))
        bak.replace(path.with_name(f"{path.name}.bak.1"))
    shutil.copy2(path, bak)
    with open(bak, "rb+") as f:
        os.fsync(f.fileno())
    return bak


@contextlib.contextmanager
def replacing(path: Path, backups: int = 0, suffix: str = ".tmp", _before_rename=None):
    """Yield a temporary path next to ``path``; on success it replaces ``path``.

    Whatever is written to the temporary path (by any library) is synced,
    the old file is backed up (``backups`` copies), and the rename happens
    only when the block ends without an error.  On an error the old file is
    untouched and the temporary file removed.
    """
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=suffix, dir=folder)
    os.close(fd)
    try:
        yield Path(tmp)
        with open(tmp, "rb+") as f:
            os.fsync(f.fileno())
        os.chmod(tmp, _mode_for(path))
        if _before_rename is not None:
            _before_rename()
        keep_backup(path, backups)
        os.replace(tmp, path)
        _fsync_folder(folder)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def write_text(path: Path, text: str, backups: int = 1, _before_rename=None) -> None:
    """Write ``text`` (UTF-8) to ``path`` safely, keeping ``backups`` previous versions."""
    with replacing(path, backups, _before_rename=_before_rename) as tmp:
        tmp.write_text(text, encoding="utf-8")
