"""One way out: every file showkit writes goes through here.

Sheets, rig updates, rendered audio, sweeps, CSV and JSON, scan-cache entries
and backups are all written the same way:

1. The target is checked first: not a folder, not a pipe or device, and not a
   file the show reads (its cue audio, the sheet, its rig -- the caller names
   them in ``protect``); the folder must exist.
2. Temporary files of earlier runs that were killed (``.NAME.<pid>.*``, their
   process gone) are removed.
3. The new content goes to a temporary file in the same folder, is flushed
   and ``fsync``'d.
4. The previous version becomes the backup (``NAME.bak``; older ones
   ``NAME.bak.1`` ...) by a **hard link** made under a temporary name and
   renamed into place -- never by copying into an existing file, and a
   symlink planted at the backup's path is replaced, never followed.  (On a
   file system without hard links the backup is copied to a temporary file,
   synced, and renamed.)
5. The temporary file is renamed over the target (atomic on POSIX) and the
   folder is synced.

So a crash or ``kill -9`` at any moment leaves the target and its backup each
a whole old or whole new version.  Any failure (disk full, no permission, a
read-only file system) is one :class:`~showkit.errors.OutputError` line, the
temporary file is removed, and nothing that existed is changed.  A new file
gets the usual permissions (``0666`` less the umask); a replaced file keeps
its own.
"""

from __future__ import annotations

import contextlib
import errno
import os
import re
import shutil
import stat
import tempfile
import time
from pathlib import Path

from showkit.errors import OutputError, ShowkitError

#: A write that fails with less room than this left on the disk failed for want of room, bytes.
FULL_BELOW_BYTES = 1 << 20
#: Temporary files in the old naming (no process id) older than this are stale, s.
STALE_AFTER_S = 3600.0


def _mode_for(path: Path) -> int:
    try:
        return stat.S_IMODE(path.stat().st_mode)
    except OSError:
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


def _reason(exc: BaseException, folder: Path | None = None) -> str:
    if isinstance(exc, OSError):
        if exc.errno in (errno.ENOSPC, errno.EDQUOT):
            return "the disk is full"
        return exc.strerror or exc.__class__.__name__
    # a library's error (libsndfile says only "System error"): a full disk is the usual cause
    if folder is not None:
        try:
            vfs = os.statvfs(folder)
            if vfs.f_bavail * vfs.f_frsize < FULL_BELOW_BYTES:
                return "the disk is full"
        except OSError:
            pass
    text = " ".join(str(exc).split())
    return text[-120:] or exc.__class__.__name__


def _same_file(a: Path, b: Path) -> bool:
    try:
        if os.path.samefile(a, b):
            return True
    except OSError:
        pass
    try:
        return a.resolve() == b.resolve()
    except (OSError, RuntimeError):
        return False


def _protected(protect):
    for item in protect or ():
        if isinstance(item, tuple):
            yield Path(item[0]), item[1]
        elif item is not None:
            yield Path(item), "a file the show reads"


def check_target(path, protect=(), what: str = "file", ending: str | None = None,
                 reads: str = "the show reads this file") -> Path:
    """Check that ``path`` may be written; returns it as a Path.

    Refuses (one :class:`OutputError` line) a folder, a pipe, a device, a
    missing folder, and any file named in ``protect`` (paths, or
    ``(path, role)`` pairs such as ``(track, "a cue's source audio")``).

    Parameters
    ----------
    path : path
        The file to be written.
    protect : iterable
        Files never written over, each a path or a ``(path, role)`` pair.
    what : str
        What is written (``"CSV file"``), for messages.
    ending : str, optional
        The file name ending the output takes (``".csv"``), for the example a refusal gives;
        by default the path's own ending, else ``.wav``.
    reads : str
        Why a protected file is refused, for messages (``"the scan reads this file"``).
    """
    path = Path(path)
    where = str(path)
    if str(path) in ("", ".") or path.name in ("", ".", ".."):
        raise OutputError(f"is not a file name for the {what}", where,
                          f"give a file name, e.g. show{ending or '.wav'}")
    try:
        st = os.stat(path)
    except FileNotFoundError:
        st = None
    except OSError as exc:
        raise OutputError(f"cannot write the {what} ({_reason(exc)})", where,
                          "give a path in a folder you may write") from None
    if st is not None and stat.S_ISDIR(st.st_mode):
        raise OutputError(f"is a folder; the {what} needs a file name", where,
                          f"give a file inside it, e.g. {path / ('out' + (ending or path.suffix or '.wav'))}")
    if st is not None and not stat.S_ISREG(st.st_mode):
        raise OutputError(f"is not a regular file; showkit will not replace it with the {what}", where,
                          "give the path of a new or ordinary file")
    for other, role in _protected(protect):
        if _same_file(path, other):
            example = f", e.g. {path.with_suffix(ending)}" if ending and path.suffix.lower() != ending else ""
            raise OutputError(f"will not write the {what} over {role}", where,
                              f"give another file name{example}: {reads}")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError(f"the folder {folder} does not exist", where,
                          "make the folder first, or give a path in an existing folder")
    return path


_SUFFIXES = r"(?:\.tmp|\.bak|\.wav|\.flac)"


def _alive(pid: int) -> bool:
    if pid == os.getpid():
        return True
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    except OSError:
        return True
    return True


def clean_stale(folder, name: str) -> list[Path]:
    """Remove temporary files left next to ``name`` by earlier runs that were killed."""
    removed = []
    folder = Path(folder)
    try:
        entries = list(os.scandir(folder))
    except OSError:
        return removed
    now = time.time()
    ours = re.compile(r"^\." + re.escape(name) + r"\.(?P<pid>\d+)\.[A-Za-z0-9_]+" + _SUFFIXES + "$")
    old = re.compile(r"^\." + re.escape(name) + r"\.[A-Za-z0-9_]{8}" + _SUFFIXES + "$")
    for entry in entries:
        if not entry.name.startswith(f".{name}."):
            continue
        m = ours.match(entry.name)
        stale = False
        if m:
            stale = not _alive(int(m.group("pid")))
        else:
            if old.match(entry.name):
                try:
                    stale = now - entry.stat(follow_symlinks=False).st_mtime > STALE_AFTER_S
                except OSError:
                    stale = False
        if stale:
            with contextlib.suppress(OSError):
                if entry.is_file(follow_symlinks=False) or entry.is_symlink():
                    os.unlink(entry.path)
                    removed.append(Path(entry.path))
    return removed


def _temp_in(folder: Path, name: str, suffix: str) -> Path:
    fd, tmp = tempfile.mkstemp(prefix=f".{name}.{os.getpid()}.", suffix=suffix, dir=folder)
    os.close(fd)
    return Path(tmp)


def keep_backup(path: Path, backups: int = 1) -> Path | None:
    """Keep the current ``path`` as ``path.bak`` (rotating ``.bak.1`` .. in all ``backups``).

    The backup is a hard link to the current file, made under a temporary name
    and renamed over ``NAME.bak``: a symlink at ``NAME.bak`` is replaced, never
    followed, and the backup is never a half-copied file.
    """
    path = Path(path)
    try:
        st = os.lstat(path)
    except FileNotFoundError:
        return None
    if backups <= 0:
        return None
    folder = path.parent if str(path.parent) else Path(".")
    bak = path.with_name(path.name + ".bak")
    if backups > 1 and os.path.lexists(bak):
        for k in range(backups - 2, 0, -1):
            older = path.with_name(f"{path.name}.bak.{k}")
            if os.path.lexists(older):
                os.replace(older, path.with_name(f"{path.name}.bak.{k + 1}"))
        os.replace(bak, path.with_name(f"{path.name}.bak.1"))
    tmp = _temp_in(folder, path.name, ".bak")
    try:
        os.unlink(tmp)
        try:
            os.link(path, tmp, follow_symlinks=False)
        except OSError as exc:
            if exc.errno not in (errno.EPERM, errno.EXDEV, errno.EMLINK, errno.ENOTSUP,
                                 getattr(errno, "EOPNOTSUPP", errno.ENOTSUP)):
                raise
            if not stat.S_ISREG(st.st_mode):
                raise
            shutil.copyfile(path, tmp)  # no hard links here: a fresh copy, synced, then renamed
            with open(tmp, "rb+") as f:
                os.fsync(f.fileno())
        os.replace(tmp, bak)
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    return bak


@contextlib.contextmanager
def replacing(path, backups: int = 0, suffix: str = ".tmp", _before_rename=None, protect=(),
              what: str = "file"):
    """Yield a temporary path next to ``path``; when the block ends it replaces ``path``.

    Whatever is written to the temporary path (by any library) is synced, the
    old file is backed up (``backups`` versions), and the rename happens only
    when the block ends without an error.  On an error the old file and its
    backups are untouched, the temporary file is removed, and an OSError or a
    library's write error becomes one :class:`OutputError` line.

    Parameters
    ----------
    path : path
    backups : int
        Previous versions kept (0: none).
    suffix : str
        Ending of the temporary file's name (``.wav`` for libraries that look at it).
    protect : iterable
        Files that must never be written over (see :func:`check_target`).
    what : str
        What is written, for messages.
    """
    path = check_target(path, protect, what)
    folder = path.parent if str(path.parent) else Path(".")
    clean_stale(folder, path.name)
    try:
        tmp = _temp_in(folder, path.name, suffix)
    except OSError as exc:
        raise OutputError(f"cannot write the {what} ({_reason(exc)})", str(path),
                          "check that the folder is writable and has room") from None
    try:
        yield tmp
        with open(tmp, "rb+") as f:
            os.fsync(f.fileno())
        os.chmod(tmp, _mode_for(path))
        if _before_rename is not None:
            _before_rename()
        keep_backup(path, backups)
        os.replace(tmp, path)
        _fsync_folder(folder)
    except ShowkitError:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise
    except (OSError, RuntimeError) as exc:  # OSError, or a library's write error (libsndfile)
        reason = _reason(exc, folder)
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise OutputError(f"cannot write the {what} ({reason})", str(path),
                          "free some space or choose a writable folder; the previous file is unchanged"
                          ) from None
    except BaseException:
        with contextlib.suppress(OSError):
            os.unlink(tmp)
        raise


def write_bytes(path, data: bytes, backups: int = 0, _before_rename=None, protect=(),
                what: str = "file") -> Path:
    """Write ``data`` to ``path`` safely (see the module docstring); returns the path."""
    with replacing(path, backups, _before_rename=_before_rename, protect=protect, what=what) as tmp:
        fd = os.open(tmp, os.O_WRONLY | os.O_TRUNC)
        try:
            view = memoryview(data)
            while view:
                n = os.write(fd, view)
                view = view[n:]
        finally:
            os.close(fd)
    return Path(path)


def write_text(path, text: str, backups: int = 1, _before_rename=None, protect=(),
               what: str = "file") -> Path:
    """Write ``text`` (UTF-8) to ``path`` safely, keeping ``backups`` previous versions."""
    return write_bytes(path, text.encode("utf-8"), backups, _before_rename, protect, what)


def write_audio(path, samples, rate_hz: int, subtype: str = "FLOAT", protect=(),
                what: str = "audio file", file_format: str = "WAV", backups: int = 0) -> Path:
    """Write samples (frames, or frames x channels) as WAV/FLAC safely, keeping ``backups``
    previous versions (``NAME.bak``); returns the path."""
    import soundfile as sf

    suffix = ".flac" if file_format == "FLAC" else ".wav"
    with replacing(path, backups, suffix=suffix, protect=protect, what=what) as tmp:
        sf.write(str(tmp), samples, int(rate_hz), subtype=subtype, format=file_format)
    return Path(path)


@contextlib.contextmanager
def audio_writer(path, rate_hz: int, channels: int = 1, subtype: str = "FLOAT", protect=(),
                 what: str = "audio file", backups: int = 0):
    """A ``soundfile.SoundFile`` open for writing block by block, replacing ``path`` when done
    (keeping ``backups`` previous versions, ``NAME.bak``)."""
    import soundfile as sf

    with replacing(path, backups, suffix=".wav", protect=protect, what=what) as tmp:
        with sf.SoundFile(str(tmp), "w", samplerate=int(rate_hz), channels=channels, subtype=subtype,
                          format="WAV") as f:
            yield f
