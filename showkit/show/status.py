"""A cue's status today, the one vocabulary of the lock, the check, the render and the run.

:class:`CueStatus` is a :class:`enum.StrEnum`: each member *is* its text (``CueStatus.OK ==
"ok"``, ``f"{CueStatus.STALE}" == "stale"``, ``json.dumps`` writes ``"over"``), so the show
log, ``--json``, the screen and any code that compares with the plain words read the same.
"""

from __future__ import annotations

from enum import StrEnum


class CueStatus(StrEnum):
    """Whether a cue may be played today.

    ``OK``: its lock is valid and its gain at or below today's ceiling (only these play);
    ``OVER``: its gain is above today's ceiling; ``STALE``: its lock no longer matches its
    sound, rig, calibration or analysis version (or today's static pressure is outside what
    the lock covers); ``ERROR``: it could not be checked, rendered or verified.
    """

    OK = "ok"
    OVER = "over"
    STALE = "stale"
    ERROR = "error"

    @classmethod
    def of(cls, value, where: str = "status") -> "CueStatus":
        """``value`` (a member or its text) as a member; an InputError for anything else."""
        try:
            return cls(value)
        except ValueError:
            from showkit.errors import InputError

            raise InputError(f"status must be one of {', '.join(cls)} (got {value!r})", where,
                             "this is a bug in the renderer") from None
