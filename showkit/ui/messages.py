"""The messages the views post up to the app (Textual :class:`~textual.message.Message`\\ s).

A view never calls into the app or another view: it posts one of these and the
app (:class:`showkit.ui.app.ShowkitApp`) routes it in an ``on_…`` handler: the
status line, a cue added, a lock asked for, today's conditions typed in, the rig
file written, a rendered cue to audition, and the progress of background jobs
(:mod:`showkit.ui.jobs`).  Messages bubble from the view up to the app.

The one deliberate exception is panic: the Run view's panic key calls
:meth:`showkit.ui.app.ShowkitApp.action_panic` directly, because silencing the
output must not wait in a message queue behind other work.
"""

from __future__ import annotations

from textual.message import Message


class Say(Message):
    """A line for the status line (``warn``: also a notification, once per text)."""

    def __init__(self, text: str, warn: bool = False) -> None:
        super().__init__()
        self.text = text
        self.warn = warn


class CueAdded(Message):
    """A cue was added to the sheet (and saved): show it and lock its ceiling."""

    def __init__(self, cue) -> None:
        super().__init__()
        self.cue = cue


class LockRequested(Message):
    """Lock these cues' ceilings (``cue_ids``), or every cue (``everything``)."""

    def __init__(self, cue_ids: list[str] | None, everything: bool = False) -> None:
        super().__init__()
        self.cue_ids = cue_ids
        self.everything = everything


class ConditionsEntered(Message):
    """Today's static pressure and/or gas temperature were typed in (text with units, or None to keep).

    ``for_check``: typed in the Run view's pre-show check, which the app starts once
    the values are taken (the check runs then instead of a second one on the change).
    """

    def __init__(self, static=None, temperature=None, for_check: bool = False) -> None:
        super().__init__()
        self.static = static
        self.temperature = temperature
        self.for_check = for_check


class RigWritten(Message):
    """A fit was written into the rig file (the Measure view): every view follows the new rig.

    ``text`` says what was written; ``refused`` is why its calibration is now refused (or None).
    """

    def __init__(self, text: str, refused: str | None = None) -> None:
        super().__init__()
        self.text = text
        self.refused = refused


class AuditionReady(Message):
    """A cue rendered and verified at its gain, to play for the audition."""

    def __init__(self, rendered) -> None:
        super().__init__()
        self.rendered = rendered


class JobProgress(Message):
    """A background job (a Textual worker) started, moved on or ended: for the progress bar."""

    def __init__(self, worker, done: int = 0, total: int = 0, ended: bool = False) -> None:
        super().__init__()
        self.worker = worker
        self.done = done
        self.total = total
        self.ended = ended
