"""The one exception family of showkit.

Every error a user can cause (a bad rig file, a bad sheet, unreadable audio,
a missing device) is a :class:`ShowkitError`.  The command line prints it as
one line -- *where*, *what is wrong*, *how to fix it* -- and exits with status 2;
it never shows a traceback for these.
"""

from __future__ import annotations

from showkit.limits import MAX_MESSAGE_PART_CHARS
from showkit.printable import printable


class ShowkitError(Exception):
    """A user-facing error: one line saying where, what and how to fix it.

    Parameters
    ----------
    what : str
        What is wrong, in plain words.
    where : str, optional
        Where it is: a file, ``file: field``, ``file, line 3`` or a cue id.
    fix : str, optional
        What the user can do about it.
    """

    exit_status = 2

    def __init__(self, what: str, where: str | None = None, fix: str | None = None):
        self.what = what
        self.where = where
        self.fix = fix
        super().__init__(self.line())

    def line(self) -> str:
        """The whole message on one line (each part at most
        :data:`showkit.limits.MAX_MESSAGE_PART_CHARS` long: a longer one keeps its start and end)."""
        what, where, fix = (_shortened(str(p)) if p else p for p in (self.what, self.where, self.fix))
        text = f"{where}: {what}" if where else what
        if fix:
            text = f"{text} -- {fix}"

        # a path or cue id quoted from a file may hold control characters: shown as escapes
        text = text.replace("\r\n", " ").replace("\n", " ").replace("\t", " ")
        return " ".join(part for part in printable(text).split(" ") if part)


def _shortened(part: str) -> str:
    """``part`` whole, or its start and end around how many characters were left out."""
    if len(part) <= MAX_MESSAGE_PART_CHARS:
        return part
    keep = (MAX_MESSAGE_PART_CHARS - 40) // 2
    return f"{part[:keep]} [... {len(part) - 2 * keep} characters ...] {part[-keep:]}"


class InputError(ShowkitError):
    """A value given on the command line or in a file is not usable."""


class RigError(ShowkitError):
    """The rig file (tube, holes, gas, drive, safety) is wrong."""


class AudioError(ShowkitError):
    """An audio file cannot be read or holds unusable samples."""


class SheetError(ShowkitError):
    """A cue sheet is wrong, stale or cannot be saved."""


class DeviceError(ShowkitError):
    """The audio device or the PortAudio library is missing or failed."""


class MeasureError(ShowkitError):
    """A measurement recording cannot be analysed."""


class OutputError(ShowkitError):
    """A file cannot be written (disk full, no permission, not a file, one the show reads)."""
