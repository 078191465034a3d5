"""What every view of the terminal UI shares: the session it shows, background jobs, the status line."""

from __future__ import annotations

from textual.binding import Binding
from textual.containers import Vertical

from showkit.ui.jobs import JobRunner
from showkit.ui.messages import Say


#: The panic key and quit, first in a view's key line so that a narrow terminal never cuts them
#: off (the App binds the same keys to the same actions; the top bar shows the panic key too).
SAFETY_KEYS = [Binding("escape", "app.panic", "PANIC", key_display="esc"),
               Binding("ctrl+q", "app.quit_safely", "quit")]


class SessionView(JobRunner, Vertical):
    """A view of the open session (:class:`showkit.ui.session.Session`).

    A view talks to the app only through messages (:mod:`showkit.ui.messages`):
    :meth:`say` posts a status line; its slow work runs as its own Textual workers
    (:meth:`~showkit.ui.jobs.JobRunner.run_job`).

    Parameters
    ----------
    session : Session
        The open sheet, its rig and today's conditions.
    """

    def __init__(self, session, **kw):
        super().__init__(**kw)
        self.session = session

    def say(self, text: str, warn: bool = False) -> None:
        """A line for the status line (posted up to the app)."""
        self.post_message(Say(text, warn))

    def ask(self, screen, done) -> None:
        """Show a dialog (a Textual screen); ``done(result)`` gets what it gives back."""
        self.app.push_screen(screen, done)
