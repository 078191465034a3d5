"""Background jobs as Textual thread workers, with their progress in the app's status line.

A node (the app or a view) that mixes in :class:`JobRunner` starts slow work with
:meth:`JobRunner.run_job`: ``work(progress)`` runs in a Textual worker thread
(``run_worker(thread=True)``) and ``done(result)`` runs on the UI thread when the
worker's state becomes SUCCESS (:class:`textual.worker.Worker.StateChanged`).  A job
of a name started again cancels the one before (``latest_only``; ``Worker.cancel``):
its result is never applied, and its ``progress`` calls stop it at the next step.  Errors go to the status line as one line, never a traceback.
The node posts :class:`~showkit.ui.messages.JobProgress` for the progress bar and
:class:`~showkit.ui.messages.Say` for the status line; both bubble up to the app.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

from textual.worker import Worker, WorkerState, get_current_worker

from showkit.errors import ShowkitError
from showkit.ui.messages import JobProgress, Say


class JobCancelled(Exception):
    """Raised in a worker thread at its next progress step after it was cancelled."""


@dataclass
class Job:
    name: str
    label: str
    done: Callable
    failed: Callable | None = None


class JobRunner:
    """Mixin for a Textual node: run slow work as a thread worker, apply its result on the UI thread."""

    def run_job(self, name: str, work, done, label: str, latest_only: bool = True, failed=None) -> Worker:
        """Run ``work(progress)`` in a worker thread, then ``done(result)`` on the UI thread.

        ``failed(error)``, if given, runs on the UI thread when ``work`` raised a
        :class:`~showkit.errors.ShowkitError` (after its line went to the status line), so
        that what waited for the result can say it will not come.

        ``progress(done, total, text=None)`` may be called from ``work`` as it goes on.
        With ``latest_only`` a job of the same name still running is cancelled
        (e.g. a check made before the last edit).
        """
        node = self

        def thread():
            worker = get_current_worker()

            def progress(k, total, what=None):
                if worker.is_cancelled:
                    raise JobCancelled(name)
                node.post_message(JobProgress(worker, int(k), int(total)))

            return work(progress)

        table = self._job_table()
        if latest_only:  # cancelled here (a worker cancelled before it ran never reports a state)
            for old, job in list(table.items()):
                if job.name == name:
                    old.cancel()
                    del table[old]
                    self.post_message(JobProgress(old, ended=True))
        self.post_message(Say(label + "…"))
        worker = self.run_worker(thread, name=name, group=name, description=label, thread=True,
                                 exclusive=False, exit_on_error=False)
        table[worker] = Job(name, label, done, failed)
        self.post_message(JobProgress(worker))
        return worker

    def job_running(self, name: str) -> bool:
        """True while a job of this name started by this node has not ended."""
        return any(job.name == name for job in self._job_table().values())

    def _job_table(self) -> dict:
        table = getattr(self, "_job_info", None)
        if table is None:
            table = self._job_info = {}
        return table

    def on_worker_state_changed(self, event: Worker.StateChanged) -> None:
        job = self._job_table().get(event.worker)
        if job is None or event.state in (WorkerState.PENDING, WorkerState.RUNNING):
            return
        del self._job_table()[event.worker]
        if not self.app.is_running:  # the app is closing (its screens are going): nothing to apply
            return
        self.post_message(JobProgress(event.worker, ended=True))
        if event.state == WorkerState.SUCCESS:
            try:
                job.done(event.worker.result)
            except ShowkitError as exc:
                self.post_message(Say(exc.line(), warn=True))
        elif event.state == WorkerState.ERROR:
            exc = event.worker.error
            if isinstance(exc, ShowkitError):
                self.post_message(Say(exc.line(), warn=True))
                if job.failed is not None:
                    job.failed(exc)
            elif not isinstance(exc, JobCancelled):  # never a traceback in the UI
                self.post_message(Say(f"{job.label} failed: {exc.__class__.__name__}: {exc}", warn=True))
