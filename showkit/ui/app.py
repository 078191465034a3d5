"""The showkit terminal UI: Show, Tube, Track, Run and Measure views over one open cue sheet.

Start it with ``showkit`` (the user's copy of the demo show), ``showkit open
SHEET.toml`` or ``showkit open TRACK.flac --rig RIG.toml``.  The domain work
is in :mod:`showkit.ui.session` (with :mod:`showkit.ui.tracks` and
:mod:`showkit.ui.measuring`; the editing model is :mod:`showkit.show.editing`);
slow work (modes, checks, locks, track analysis, rendering for the audition) runs
as Textual thread workers (:mod:`showkit.ui.jobs`) with a progress bar in the
status line, so keys are answered at once.

The views talk to the app through messages (:mod:`showkit.ui.messages`): they post
them up and the app routes them in its ``on_…`` handlers (the status line, a cue
added, a lock, today's conditions, a new rig file, an audition, job progress).

Panic is the operator key map's (:mod:`showkit.show.operator_keys`): Ctrl+C is
an App-level priority binding, so it works in every view and every dialog; Esc
panics in every view (in a dialog Esc closes the dialog).  Both call the live
engine's ``panic()`` before anything else, and the panic is written to the show
log.  No key that panics does anything else anywhere in the UI.

Each view is imported, built and mounted when it is first shown (:meth:`ShowkitApp.view`
returns None for a view not built yet), so the first screen costs one view's
imports and styling, not five.  The app therefore tells only the views that exist
about a change (conditions, checks, modes, a new rig), and each view, when it is
built later, draws the session's state as it is then in its ``on_mount``.
"""

from __future__ import annotations

import importlib
from pathlib import Path

from rich.text import Text
from textual.app import App, ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.widgets import ContentSwitcher, Footer, ProgressBar, Static

from showkit.errors import ShowkitError
from showkit.printable import printable
from showkit.show.status import CueStatus
from showkit.units import agree, format_count, format_every
from showkit.ui import messages as msg
from showkit.ui.jobs import JobRunner
from showkit.ui.session import Session

VIEWS = ("show", "tube", "track", "run", "measure")
#: The keys that work in every view, on a line of their own under the view's keys (the
#: footer): one line could not hold both at 120 columns, and the view's own keys, the panic
#: key and quit come first.
GLOBAL_KEYS = [*(Binding(str(k + 1), f"view('{name}')", name, show=False) for k, name in enumerate(VIEWS)),
               Binding("m", "manometer", "manometer", show=False),
               Binding("a", "audition", "audition", show=False),
               Binding("ctrl+z", "undo", "undo", show=False),
               Binding("question_mark", "help", "keys", key_display="?", show=False)]

#: Each view's module and class: imported and built when the view is first shown.
VIEW_CLASSES = {"show": ("showkit.ui.show", "ShowView"), "tube": ("showkit.ui.tube", "TubeView"),
                "track": ("showkit.ui.track", "TrackView"), "run": ("showkit.ui.run", "RunView"),
                "measure": ("showkit.ui.measure", "MeasureView")}

#: The widget of each view that has the focus when the view is shown.
VIEW_FOCUS = {"show": "#cue-table", "tube": "#mode-table", "track": "#track-map",
              "run": "#run-table", "measure": "#measure-table"}


def view_class(name: str):
    """The class of a view (its module is imported at the first call)."""
    module, cls = VIEW_CLASSES[name]
    return getattr(importlib.import_module(module), cls)


class ShowkitApp(JobRunner, App):
    """The terminal UI.

    Parameters
    ----------
    session : Session
        The open sheet.
    track : Path, optional
        A track to analyse at once (the Track view opens first).
    view : str
        The first view: ``"show"``, ``"tube"``, ``"track"``, ``"run"`` or ``"measure"``.
    cautions : bool or None
        Show the safety cautions at start: None for "once, at first start".
    log_path : Path, optional
        The show log of the run view (default: the user's data directory, as `showkit run`).
    """

    CSS_PATH = "app.tcss"
    TITLE = "showkit"
    ENABLE_COMMAND_PALETTE = False

    BINDINGS = [
        Binding("ctrl+c", "panic", "PANIC", priority=True, show=False),  # always in the top bar
        Binding("escape", "panic", "PANIC", key_display="esc"),
        Binding("ctrl+q", "quit_safely", "quit", priority=True),
        *GLOBAL_KEYS,
        Binding("D", "device", "audio device", show=False),
        Binding("ctrl+s", "save", "save", show=False),
        Binding("exclamation_mark", "cautions", "cautions", show=False),
    ]

    def __init__(self, session: Session, track: Path | None = None, view: str = "show",
                 cautions: bool | None = None, log_path: Path | None = None):
        super().__init__()
        self.session = session
        if log_path is not None:
            session.log_path = log_path
        self.first_track = track
        self.first_view = view if view in VIEWS else "show"
        self.want_cautions = cautions
        self.audition = None
        self._jobs: dict = {}   # worker -> (steps done, steps in all): the progress bar
        self._status_text = ""
        self._auto_locked: set[str] = set()
        self._last_warning = ""
        self._held: list[str] = []
        self._audition_timer = None
        self.background_started = False
        self._views: dict = {}   # name -> the view's widget, for the views built so far

    # ------------------------------------------------------------ layout
    def compose(self) -> ComposeResult:
        yield Static("", id="topbar")
        with ContentSwitcher(initial=self.first_view, id="views"):
            yield self._new_view(self.first_view)
            if self.first_track is not None and self.first_view != "track":
                yield self._new_view("track")  # the track opened at start is analysed in it
        with Horizontal(id="statusbar"):
            yield Static("", id="status")
            yield ProgressBar(id="progress", show_eta=False, show_percentage=False)
        yield Footer()
        yield Static("", id="keyline")

    def on_mount(self) -> None:
        self.query_one("#progress", ProgressBar).display = False
        self.update_topbar()
        self._show_view(self.first_view)
        self.say("opened " + str(self.session.sheet.path))
        # the slow work starts once the first screen is drawn (its imports would hold the GIL)
        self.set_timer(0.15, self.start_background)
        if self.want_cautions or (self.want_cautions is None and not _cautions_seen()):
            from showkit.ui.safety import CautionScreen

            self.push_screen(CautionScreen(), self._cautions_closed)
        if self.first_track is not None:
            self.set_timer(0.15, lambda: self.view("track").open_track(self.first_track))

    # ------------------------------------------------------------ messages from the views
    def on_say(self, message: msg.Say) -> None:
        self.say(message.text, message.warn)

    def on_job_progress(self, message: msg.JobProgress) -> None:
        worker = message.worker
        if not message.ended and (worker.is_cancelled or worker.is_finished):
            return  # a step that came after the end
        self._job(worker, message.done, message.total, message.ended)

    def on_cue_added(self, message: msg.CueAdded) -> None:
        self.cue_added(message.cue)

    def on_lock_requested(self, message: msg.LockRequested) -> None:
        self.start_lock(message.cue_ids, everything=message.everything)

    def on_conditions_entered(self, message: msg.ConditionsEntered) -> None:
        """Today's readings typed in a dialog: one door for all (:meth:`change_conditions`)."""
        if message.for_check:  # the Run view's pre-show check: it runs the check itself
            try:
                self.session.base_rig()
                self.session.show_log()
            except ShowkitError as exc:
                self.say(exc.line(), warn=True)
                return
            if not self.change_conditions(message.static, message.temperature, recheck_run=False):
                return
            try:
                self.session.save()
            except ShowkitError as exc:
                self.say(exc.line(), warn=True)
                return
            run = self.view("run")
            if run is not None:
                run.check_again()
            return
        if self.change_conditions(message.static, message.temperature) and message.static is not None:
            self.say(f"today's static pressure {self.session.rig.static_pa:.2f} Pa: "
                     "every ceiling re-derived, in every view")

    def on_rig_written(self, message: msg.RigWritten) -> None:
        """The Measure view wrote a fit into the rig file: the Run view checks again, the rest follows."""
        self.session.reload_rig()
        run = self.view("run")
        if run is not None:  # its cues were verified on the old rig (a Run view built later checks anew)
            run.rig_changed()
        if message.refused:
            # the fit moved the modes next to the calibration frequency: no levels until calibrated again
            self.say(f"{message.text}; calibrate again before using this rig: {message.refused}", warn=True)
            return
        self.start_background()
        self.update_topbar()
        self.say(f"{message.text}; modes and ceilings re-derived for the measured tube")

    def on_audition_ready(self, message: msg.AuditionReady) -> None:
        self.play_rendered(message.rendered)

    # ------------------------------------------------------------ views, built when first shown
    def _new_view(self, name: str):
        widget = view_class(name)(self.session, id=name)
        self._views[name] = widget
        return widget

    def view(self, name: str):
        """The view called ``name``, or None while it was never shown (nothing to tell it then)."""
        return self._views.get(name)

    # ------------------------------------------------------------ status line and progress
    def say(self, text: str, warn: bool = False) -> None:
        """A message in the status line (warnings also as a notification, once per text)."""
        text = printable(text)  # may quote cue ids, labels and paths from files
        self._status_text = text
        status = self.query_one("#status", Static)
        status.update(Text(("⚠ " if warn else "") + text))
        status.set_class(warn, "warn")
        if warn and self._cautions_up():
            if text not in self._held:  # shown again when the cautions are closed
                self._held.append(text)
        elif warn and text != self._last_warning:
            self.notify(text, severity="warning", timeout=6)
        self._last_warning = text if warn else ""

    def _job(self, worker, done: int = 0, total: int = 0, end: bool = False) -> None:
        """The progress bar: the sum of the steps of every job (worker) still running."""
        if end:
            self._jobs.pop(worker, None)
        else:
            self._jobs[worker] = (done, total)
        bar = next(iter(self.query("#progress").results(ProgressBar)), None)
        if bar is None:
            return  # a step that arrived while the app was closing: its screen is gone
        if not self._jobs:
            bar.display = False
            return
        bar.display = True
        d = sum(v[0] for v in self._jobs.values())
        t = sum(v[1] for v in self._jobs.values())
        bar.update(total=t if t else None, progress=d)

    def busy(self, name: str) -> bool:
        """True while a job of this name started by the app runs."""
        return self.job_running(name)

    # ------------------------------------------------------------ background work
    def start_background(self) -> None:
        """Rig, modes and today's checks (slow the first time: a worker)."""
        self.background_started = True
        self.start_modes()
        self.start_checks()

    def start_modes(self) -> None:
        s = self.session

        def work(progress):
            rig = s.rig
            return rig, s.compute_modes(rig)

        def done(result):
            rig, modes = result
            s.modes = modes
            self.update_topbar()
            tube = self.view("tube")
            if tube is not None:  # else it draws the modes when it is first shown
                tube.show_rig()
            self.say(f"{len(modes)} modes below the plane-wave limit")

        self.run_job("modes", work, done, "finding the tube's modes", failed=lambda exc: self.update_topbar())

    def start_checks(self) -> None:
        s = self.session
        from showkit.show.sheet import sheet_to_text

        text = sheet_to_text(s.sheet)

        def work(progress):
            return s.compute_checks(text, s.rig)

        def done(checks):
            checks = s.accept_checks(checks, text)
            if self.view("show") is not None:
                self.view("show").refresh_table()
            unlocked = [c.id for c in s.sheet.cues if c.lock is None and c.id in checks
                        and checks[c.id].status == CueStatus.STALE and c.id not in self._auto_locked]
            self._auto_locked.update(unlocked)
            if unlocked and not self.busy("lock"):
                self.say(f"locking {format_count(len(unlocked), 'cue')} that "
                         f"{agree(len(unlocked), 'was', 'were')} never locked…")
                self.start_lock(unlocked)
                return
            bad = [c for c in checks.values() if c.status != CueStatus.OK]
            if bad:
                from showkit.ui.show import ui_message as _ui_message

                self.say(f"{format_count(len(bad), 'cue')} {agree(len(bad), 'needs', 'need')} attention; "
                         f"{bad[0].id} is {bad[0].status}: "
                         f"{_ui_message(bad[0].message)}", warn=any(c.status != CueStatus.STALE for c in bad))
            else:
                self.say(f"{format_every(len(checks), 'cue')}{agree(len(checks), ' is', '')} ok for today's conditions")

        def failed(exc):  # the rig could not be read: the Show view says so instead of "checking…"
            if self.view("show") is not None:
                self.view("show").refresh_table()

        self.run_job("checks", work, done, "checking every cue against today's conditions", failed=failed)

    def start_lock(self, ids: list[str] | None, everything: bool = False) -> None:
        s = self.session
        from showkit.show.sheet import sheet_to_text

        if everything:
            ids = [c.id for c in s.sheet.cues]
        text = sheet_to_text(s.sheet)
        rig = s.rig

        def work(progress):
            return s.lock_job(ids, progress, text, rig)

        def done(cues):
            notes = s.apply_locks(cues)
            self.start_checks()
            self.say(f"locked {format_count(len(cues), 'cue')} (saved)" + ("; " + "; ".join(notes) if notes else ""),
                     warn=bool(notes))

        self.run_job("lock", work, done, "locking ceilings", latest_only=False)

    def cue_added(self, cue) -> None:
        """After a cue was added: show it, and lock it in the background."""
        view = self.view("show")
        if view is not None:
            view.refresh_table(cue.id)
        self.say(f"added cue {cue.id} at {cue.gain_db:+.1f} dB (saved); locking its ceiling…")
        # a level was just set (from any view, the Track view's c too): the level caution with it
        from showkit.safety import LEVEL_CAUTION
        from showkit.show.sheet import PauseSource

        if not isinstance(cue.source, PauseSource):  # a pause plays nothing: no level to warn of
            self.notify(LEVEL_CAUTION, title=f"CAUTION: cue {printable(cue.id)} set to {cue.gain_db:+.1f} dB",
                        severity="warning", timeout=8)
        self.start_lock([cue.id])

    def change_conditions(self, static=None, temperature=None, *, recheck_run: bool = True) -> bool:
        """Today's conditions changed (the manometer key, the gas temperature, the pre-show check).

        One door (:meth:`Session.set_conditions`), then every view follows at once: the
        top line and the Tube view's facts, the modes (a new temperature), every cue's
        ceiling and check (Show view), the Track view, and the Run view, which
        withdraws at once the cues whose fit is no longer known and runs its pre-show
        check again (``recheck_run``; its own check runs it itself).  Returns False
        when the value was refused (the status line says why; nothing changed).
        """
        try:
            static_changed, temperature_changed = self.session.set_conditions(static, temperature)
        except ShowkitError as exc:
            self.say(exc.line(), warn=True)
            return False
        if not (static_changed or temperature_changed):
            return True
        self.update_topbar()
        tube = self.view("tube")
        if tube is not None:
            tube.conditions_changed(new_modes=temperature_changed)
        if temperature_changed:
            self.start_modes()
        self.start_checks()
        # the views not built yet read today's conditions from the session when first shown
        if self.view("track") is not None:
            self.view("track").conditions_changed()
        if self.view("run") is not None:
            self.view("run").conditions_changed(static_changed, temperature_changed, recheck=recheck_run)
        return True

    def update_topbar(self, app_width: int | None = None) -> None:
        """Sheet title, today's conditions and the rig name, with the panic key always at the right.

        On a narrow terminal the words are shortened first, then the title, so the
        rig name and the panic key stay on screen.  ``app_width``: the terminal's new width
        during a resize (the app's own size still reads the old one then).
        """
        s = self.session
        bar = self.query_one("#topbar", Static)
        # the bar spans the screen: its width is the app's (during a resize, the new one given)
        width = max(20, (app_width or self.size.width or bar.size.width) - 2)
        if s.rig_problem is not None:  # the rig file could not be read: say so, never "loading"
            variants = [[f"rig problem: {s.rig_problem.what}"], ["rig problem (status line)"]]
        elif not s.rig_loaded:  # loading the rig imports the model: done in the background
            variants = [["loading the rig…"]]
        else:
            try:
                rig = s.rig
                st, gas = rig.static_pa, rig.temperature_k - 273.15
                t1 = " (today)" if s.static_pa else ""
                t2 = " (today)" if s.temperature_k else ""
                t3 = "*" if s.static_pa else ""
                t4 = "*" if s.temperature_k else ""
                variants = [[f"static {st:.1f} Pa{t1}", f"gas {gas:.1f} °C{t2}", rig.name],
                            [f"{st:.1f} Pa{t3}", f"{gas:.1f} °C{t4}", rig.name]]
            except ShowkitError as exc:
                variants = [[f"rig problem: {exc.line()}"]]
        bar.update(_topbar_text(s.sheet.title, variants, width))

    def on_resize(self, event) -> None:
        from textual.css.query import NoMatches

        try:
            self.update_topbar(event.size.width)
        except NoMatches:  # before the first compose
            return

    # ------------------------------------------------------------ actions
    async def action_view(self, name: str) -> None:
        """Show a view; the first time, build and mount it (awaited: it is drawn and ready after the key)."""
        if name not in self._views:
            widget = self._new_view(name)
            widget.display = False  # until the switcher shows it
            await self.query_one(ContentSwitcher).mount(widget)
        self._show_view(name)

    def _show_view(self, name: str) -> None:
        self.query_one(ContentSwitcher).current = name
        self.query_one("#keyline", Static).update(self._keyline_text(name))
        # focus at once (not on the next idle), so that a key typed right after the
        # view key already goes to the new view
        self.screen.set_focus(self.view(name).query_one(VIEW_FOCUS[name]))
        self.refresh_bindings()

    def _keyline_text(self, current: str) -> Text:
        """:data:`GLOBAL_KEYS` as one line, the view shown marked; a key the view takes for
        itself (the Run view's ``a``) is left out."""
        own = {key.strip() for b in type(self.view(current)).BINDINGS
               for key in (b.key if isinstance(b, Binding) else b[0]).split(",")}
        line = Text()
        for b in GLOBAL_KEYS:
            if b.key in own:
                continue
            if line:
                line.append(" ")  # one space: the whole line fits 80 columns; the keys stand out in colour
            line.append(b.key_display or self.get_key_display(b), style="bold #ffb74d")
            line.append(" " + b.description, style="reverse" if b.action == f"view('{current}')" else "")
        return line

    def action_manometer(self) -> None:
        from showkit.safety import LEVEL_CAUTION
        from showkit.ui.dialogs import AskScreen

        rig = self.session.rig

        def done(values):
            if values:
                self.post_message(msg.ConditionsEntered(static=values["static"]))

        self.push_screen(AskScreen("Today's manometer reading (static overpressure)",
                                   [("static", 'reading (e.g. "18 Pa", "0.08 inH2O", "0.2 mbar")',
                                     f"{rig.static_pa:.2f} Pa")], note=f"CAUTION: {LEVEL_CAUTION}"), done)

    def action_undo(self) -> None:
        if self.session.undo():
            if self.view("show") is not None:
                self.view("show").refresh_table()
            self.say("undone (saved)")
            self.start_checks()
        else:
            self.say("nothing to undo")

    def action_save(self) -> None:
        try:
            path = self.session.save()
        except ShowkitError as exc:
            self.say(exc.line(), warn=True)
            return
        self.say(f"saved {path} (previous version kept as .bak)")

    def action_help(self) -> None:
        from showkit.ui.help import HelpScreen

        self.push_screen(HelpScreen([("Everywhere", self.BINDINGS), ("Show view (1)", view_class("show").BINDINGS),
                                     ("Tube view (2)", view_class("tube").BINDINGS),
                                     ("Track view (3)", view_class("track").BINDINGS),
                                     ("Run view (4): the operator's keys, the same in `showkit run`",
                                      _operator_help()),
                                     ("Measure view (5)", view_class("measure").BINDINGS),
                                     ("Lists", [("up,down", "", "move the selection")])]))

    def action_cautions(self) -> None:
        from showkit.ui.safety import CautionScreen

        self.push_screen(CautionScreen(), self._cautions_closed)

    def _cautions_up(self) -> bool:
        from showkit.ui.safety import CautionScreen

        return any(isinstance(sc, CautionScreen) for sc in self.screen_stack)

    def _cautions_closed(self, _result=None) -> None:
        """Raise again the warnings that came while the cautions covered the screen."""
        held, self._held = self._held, []
        for text in held:
            self.notify(text, severity="warning", timeout=20)
        if held:
            self._last_warning = held[-1]  # notified just above
            self.say(held[-1], warn=True)

    def action_audition(self) -> None:
        view = self.query_one(ContentSwitcher).current
        if view == "track":
            self.view("track").audition()  # the Track view's selection: it posts AuditionReady
            return
        show = self.view("show")
        if show is not None:
            cid = show.selected_id()
        else:  # the Show view's cursor starts on the first cue
            cid = self.session.sheet.cues[0].id if self.session.sheet.cues else None
        if cid is None:
            self.say("no cue to audition")
            return
        s = self.session
        check = s.checks.get(cid)
        if check is None or check.status != CueStatus.OK:
            self.say(f"{cid} cannot be auditioned: " + ("it is being checked" if check is None else check.message),
                     warn=True)
            return
        self.run_job("render", lambda progress: s.render_job(cid), self.play_rendered,
                     f"rendering {cid} at {s.sheet.cue(cid).gain_db:+.1f} dB for the audition")

    def play_rendered(self, rendered) -> None:
        """Play a rendered (verified) cue; without a device, say so."""
        from showkit.ui.audition import Audition

        if self.audition is None:
            self.audition = Audition()
        try:
            self.audition.play(rendered, device=self.session.device)
        except ShowkitError as exc:
            self.say(f"no audition: {exc.line()}", warn=True)
            return
        self.say(f"playing {rendered.id} at {rendered.gain_db:+.1f} dB -- esc stops it (panic)")
        if self._audition_timer is None:
            self._audition_timer = self.set_interval(0.1, self._poll_audition, name="audition")

    def _poll_audition(self) -> None:
        if self.audition is None or not self.audition.playing:
            return
        try:
            text = self.audition.poll()
        except ShowkitError as exc:
            text = exc.line()
        if text:
            self.say(text)

    # ------------------------------------------------------------ live sound: panic, device, log
    def action_panic(self) -> None:
        """PANIC: silence within the engine's panic ramp (20 ms), from any view or dialog.

        The engine's ``panic()`` is called first, before anything is drawn or logged here.
        """
        run = self.view("run")
        live = run.panic() if run is not None else False  # no Run view: no engine was ever made
        heard = False
        if self.audition is not None and self.audition.playing:
            self.audition.stop()  # panic() then close()
            heard = True
        if live:
            from showkit.show.operator_keys import shown

            self.say(f"PANIC: output to silence, the show is stopped; press {shown('rearm')} in the run "
                     "view (4) to re-arm when it is safe", warn=True)
            run.refresh_now()
        elif heard:
            self.say("PANIC: the audition was silenced", warn=True)
            try:  # the show log records every panic that silenced something
                self.session.show_log().write("panic", None, None,
                                              "panic key in the UI: the audition was silenced")
            except ShowkitError as exc:
                self.say(f"PANIC: the audition was silenced; not logged: {exc.line()}", warn=True)
        else:
            self.say("PANIC: nothing was playing")

    def action_device(self) -> None:
        from showkit.ui.device import DeviceScreen, describe

        screen = DeviceScreen(self.session.device)

        def done(result):
            if not result:
                return
            self.session.device = result[1]
            self.say(f"audio output: {describe(screen.found, result[1])} (audition and run view; "
                     "the run view uses it from its next check or reconnect, o)")

        self.push_screen(screen, done)
        if screen.problem:
            self.say(screen.problem, warn=True)

    def action_quit_safely(self) -> None:
        """Panic if a show plays, save (safely) and quit, no dialog."""
        self.workers.cancel_all()
        run = self.view("run")
        if run is not None:
            try:
                run.close()  # panics first if a cue plays
            except Exception:
                pass
        self.session.close_log()
        if self.audition is not None:
            try:
                self.audition.stop()
            except Exception:
                pass
        message = None
        try:
            self.session.save()
        except ShowkitError as exc:
            message = f"showkit: could not save on quit: {exc.line()}"
        self.exit(return_code=0, message=message)


#: The panic keys as the top line shows them (Esc in every view, Ctrl+C also in dialogs).
PANIC_HINT = "esc/ctrl+c PANIC"


def _topbar_text(title: str, variants: list[list[str]], width: int) -> Text:
    """The top line in ``width`` cells: the first variant that fits, else the title cut."""
    sep = "  ·  "
    title = printable(title)
    variants = [[printable(p) for p in parts] for parts in variants]
    for prefix in ("showkit" + sep, ""):
        for parts in variants:
            left = prefix + sep.join([title] + parts)
            if len(left) + 2 + len(PANIC_HINT) <= width:
                return _with_panic(left, width)
    parts = variants[-1]
    rest = " · " + " · ".join(parts)
    room = width - 2 - len(PANIC_HINT) - len(rest)
    cut = title if len(title) <= room else title[: max(0, room - 1)] + "…"
    return _with_panic((cut + rest)[: max(0, width - 2 - len(PANIC_HINT))], width)


def _with_panic(left: str, width: int) -> Text:
    out = Text(left)
    out.append(" " * max(2, width - len(left) - len(PANIC_HINT)))
    out.append(PANIC_HINT, style="bold reverse")
    return out


def _operator_help() -> list[tuple[str, str, str]]:
    """The Run view's keys for the help: the one operator key table, then the view's own."""
    from showkit.show.operator_keys import OPERATOR_KEYS

    rows = [(",".join(k.keys), "", k.does) for k in OPERATOR_KEYS]
    rows += [(b.key, "", b.description) for b in view_class("run").BINDINGS if not b.action.startswith("operator")]
    return rows


def _cautions_seen() -> bool:
    from showkit.ui.safety import cautions_seen

    return cautions_seen()

