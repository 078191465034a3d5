"""A cue's status today, the one vocabulary of the lock, the check, the render and the run;
and the show's state, the one state enum of the mixer, the engine and the screens.

:class:`CueStatus` is a :class:`enum.StrEnum`: each member *is* its text (``CueStatus.OK ==
"ok"``, ``f"{CueStatus.STALE}" == "stale"``, ``json.dumps`` writes ``"over"``), so the show
log, ``--json``, the screen and any code that compares with the plain words read the same.
"""

from __future__ import annotations

from enum import StrEnum

from showkit.errors import InputError


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
            raise InputError(f"status must be one of {', '.join(cls)} (got {value!r})", where,
                             "this is a bug in the renderer") from None


#: How the ceiling of a cue that plays nothing (a pause) reads: its locked ceiling is only
#: the cap on the gain of silence (:data:`showkit.physics.ceiling.MAX_GAIN_DB`), no level.
SILENCE = "silence"
#: The note of an ok cue that plays nothing.
SILENT_MESSAGE = "plays nothing (silence): no level to cap"


def ceiling_text(ceiling_db: float | None, silent: bool = False, digits: int = 2, unit: str = "") -> str:
    """A ceiling as the tables and screens show it: signed dB, ``-`` while it is not known,
    :data:`SILENCE` for a cue that plays nothing.

    Parameters
    ----------
    ceiling_db : float or None
        Today's ceiling, dB.
    silent : bool
        The cue plays nothing and is ok (:attr:`showkit.show.lock.CueCheck.silent`).
    digits : int
        Decimal places of the dB figure.
    unit : str
        Written after the figure (e.g. ``" dB"``), not after ``-`` or :data:`SILENCE`.
    """
    if silent:
        return SILENCE
    return "-" if ceiling_db is None else f"{ceiling_db:+.{digits}f}{unit}"


def over_amount_text(over_db: float) -> str:
    """How far a gain is over its ceiling, dB, with the decimals that show it: a gain locked at
    the ceiling and a static pressure a hair lower today read ``0.03``, and one still smaller
    is never shown as ``0.00`` (two significant digits below 0.01 dB, ``<0.001`` below that).

    Parameters
    ----------
    over_db : float
        Gain minus ceiling, dB (above zero).
    """
    if round(over_db, 2) >= 0.01:
        return f"{over_db:.2f}"
    return f"{over_db:.2g}" if over_db >= 0.001 else "<0.001"


def headroom_text(headroom_db: float | None, silent: bool = False, digits: int = 2, unit: str = "") -> str:
    """Headroom (ceiling - gain, dB) as the tables show it: ``-`` while it is not known and
    for a cue that plays nothing (no level, so nothing to be below); see :func:`ceiling_text`.
    A cue over its ceiling never reads ``-0.00``: the amount shows (:func:`over_amount_text`)."""
    if silent or headroom_db is None:
        return "-"
    if headroom_db < 0 and round(headroom_db, digits) == 0:
        return f"-{over_amount_text(-headroom_db)}{unit}"
    return f"{headroom_db:+.{digits}f}{unit}"


class State(StrEnum):
    """The show's state: the audio callback's state machine (:mod:`showkit.show.mixer`) moves
    between IDLE, PLAYING, FADING and PANIC; FAULT (the device failed) and CLOSED (the stream is
    closed) are the engine's.  Each member *is* its status word (``State.IDLE == "idle"``), the
    word :meth:`showkit.show.engine.Engine.status` reports and ``showkit run`` prints.
    """

    IDLE = "idle"
    PLAYING = "playing"
    FADING = "fading"
    PANIC = "panic"
    FAULT = "fault"
    CLOSED = "closed"
