"""The Run view: the pre-show check, then the show played live through the audio device.

The pre-show check takes today's manometer reading and gas temperature and
re-derives every ceiling (:func:`showkit.show.preshow.pre_show_check`, the
same check as `showkit run`); cues that no longer fit are listed and cannot
be started.  The show is played by :class:`showkit.show.engine.Engine`, which
only ever scales the rendered cues down.  The flame row under the cue is the
pressure model's prediction for each rendered cue
(:meth:`showkit.ui.session.Session.cue_flames_job`), computed ahead of time in a
worker and looked up by the engine's play position: this view holds no physics.

The operator's keys are those of `showkit run`, read from the one table in
:mod:`showkit.show.operator_keys` (Enter or space go, Esc or Ctrl+C panic, f
fade, - and + the fader, a re-arm, d reconnect); the view adds c (pre-show
check) and s (start the selected cue).  Ctrl+C is also an App-level priority
binding, so it panics from every view and dialog; see
:meth:`showkit.ui.app.ShowkitApp.action_panic`.

Today's conditions are the session's one set (:meth:`showkit.ui.session.Session.set_conditions`).
When they change anywhere (the manometer key, the gas temperature, this view's
check), :meth:`RunView.conditions_changed` at once withdraws every cue whose fit
is no longer known (a manometer change re-derives each ceiling exactly and
withdraws only those that no longer fit; a cue playing above its new ceiling is
brought down to it by the fader), then runs the pre-show check again.
"""

from __future__ import annotations

import math

from rich.markup import escape
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.widget import Widget
from textual.widgets import DataTable, Static

from showkit.errors import DeviceError, ShowkitError
from showkit.printable import printable
from showkit.safety import LEVEL_CAUTION
from showkit.show.operator_keys import shown
from showkit.show.status import State, ceiling_text
from showkit.units import agree, format_count, format_every, format_time

#: The operator's keys as printed in this view's messages (from the one table).
GO_KEY, PANIC_KEY, RECONNECT_KEY, FADE_KEY = (
    shown("go"), shown("panic"), shown("reconnect"), shown("fade"))
from showkit.ui.drawing import flame_picture
from showkit.ui.messages import ConditionsEntered
from showkit.ui.viewbase import SessionView

#: How often the view asks the engine what is happening, s.
POLL_S = 0.05
#: One press of the fader keys, dB.
FADER_STEP_DB = 1.0
FLAME_LINES = 4

STATE_WORDS = {State.IDLE: "ready", State.PLAYING: "PLAYING", State.FADING: "FADING",
               State.PANIC: "PANIC (silent)", State.FAULT: "DEVICE FAULT", State.CLOSED: "closed"}


def _no_output(exc) -> str:
    """The status line for a device that would not open, starting "no audio output" once."""
    if exc.what.startswith("no audio output"):
        return exc.what + (f" -- {exc.fix}" if exc.fix else "")
    return f"no audio output: {exc.line()}"


class RunTable(DataTable, inherit_bindings=False):
    """The cues as the pre-show check found them.

    DataTable's cursor keys, but not its Enter: Enter is the operator's go key,
    which the Run view binds (from the one operator key table).
    """

    BINDINGS = [Binding("up", "cursor_up", show=False), Binding("down", "cursor_down", show=False),
                Binding("pageup", "page_up", show=False), Binding("pagedown", "page_down", show=False),
                Binding("home", "scroll_home", show=False), Binding("end", "scroll_end", show=False)]


def _operator_bindings() -> list[Binding]:
    """The Run view's bindings of the operator key table (help is the App's ``?``)."""
    from showkit.show.operator_keys import OPERATOR_KEYS

    out = []
    for k in OPERATOR_KEYS:
        if k.action == "help":
            continue
        keys = [name for name in k.keys if name != "ctrl+c"]  # ctrl+c: the App's, every view
        display = {"go": "⏎/space", "panic": "esc"}.get(k.action)
        out.append(Binding(",".join(keys), f"operator('{k.action}')", k.short, key_display=display,
                           show=k.action not in ("reconnect",)))
    return out


class RunFlames(Widget):
    """The predicted flame row at the play position of the cue that plays."""

    DEFAULT_CSS = "RunFlames { height: 6; }"

    def __init__(self, **kw):
        super().__init__(**kw)
        self.positions_m: list[float] = []
        self.length_m = 1.0
        self.row = None
        self.lo = 0.0
        self.hi = 1.0
        self.caption = f"flame row: run the pre-show check (c), then start a cue ({GO_KEY})"

    def set_rig(self, positions_m, length_m: float) -> None:
        self.positions_m, self.length_m = list(positions_m), float(length_m)
        self.refresh()

    def show(self, row, lo: float, hi: float, caption: str) -> None:
        if row is None and self.row is None and caption == self.caption:
            return
        self.row, self.lo, self.hi, self.caption = row, lo, hi, caption
        self.refresh()

    def render(self) -> Text:
        return flame_picture(self.caption, self.row, None, self.positions_m, self.length_m,
                             max(10, self.size.width - 2), FLAME_LINES, lo=self.lo, hi=self.hi)


class RunView(SessionView):
    """Pre-show check, the cue playing and the next, fader, flame row, faults, level caution."""

    BINDINGS = [Binding("c", "check", "check"), *_operator_bindings(),
                Binding("s", "start_selected", "start selected", show=False)]

    def __init__(self, session, **kw):
        super().__init__(session, **kw)
        self.cues: list = []          # RenderedCue, from the last pre-show check
        self.problems: list[str] = []
        self.engine = None
        self.flames: dict = {}        # cue id -> (height frames, frame rate Hz, lo, hi)
        self.readings = ""
        self.message = ""
        self._timer = None
        self.checking = False             # a pre-show check is running
        self._checked_static_pa = None    # the static pressure of the last check, Pa
        self._deferred = None             # a check that came back while a cue played
        self._running_static_pa = None
        self._checked_text = None         # the saved sheet the last check read

    def compose(self) -> ComposeResult:
        yield Static("", id="run-title")
        yield RunTable(id="run-table", cursor_type="row", zebra_stripes=False)
        yield Static("", id="run-now")
        yield RunFlames(id="run-flames")
        yield Static("", id="run-message")
        yield Static(f"CAUTION: {LEVEL_CAUTION}", id="run-caution")

    def on_mount(self) -> None:
        table = self.query_one(RunTable)
        for label, key, width in (("#", "n", 2), ("cue", "id", 14), ("length", "len", 7),
                                  ("gain", "gain", 6), ("ceiling", "ceiling", 7), ("state", "state", 6),
                                  ("then", "then", 4)):
            table.add_column(label, key=key, width=width)
        table.add_column("why not / label", key="why")
        self.query_one("#run-title", Static).update(
            "[b]Run the show[/b]  no pre-show check yet: press c and enter today's manometer reading "
            "and gas temperature")
        self.refresh_now()

    # ------------------------------------------------------------ pre-show check
    def action_check(self) -> None:
        if self.engine is not None and self.engine.busy:
            self.say(f"a cue is playing: fade it out ({FADE_KEY}) or panic ({PANIC_KEY}) before a new check",
                         warn=True)
            return
        from showkit.ui.dialogs import AskScreen

        try:
            rig = self.session.rig
            static, temp = f"{rig.static_pa:.2f} Pa", f"{rig.temperature_k - 273.15:.1f} C"
        except ShowkitError:
            static, temp = "", ""

        def done(values):
            if values:
                self.start_check(values["static"], values["temperature"])

        self.ask(AskScreen("Pre-show check: today's readings", [
            ("static", 'manometer reading (e.g. "18 Pa", "0.08 inH2O")', static),
            ("temperature", 'gas temperature (e.g. "19 C")', temp)],
            note=f"CAUTION: {LEVEL_CAUTION}"), done)

    def start_check(self, static_text: str, temperature_text: str) -> None:
        """Today's readings go up to the app (the session's one door: every view follows);
        the app then calls :meth:`check_again`."""
        self.post_message(ConditionsEntered(static_text, temperature_text, for_check=True))

    def check_again(self) -> None:
        """Today's readings were taken (and the sheet saved): a new engine after a new check."""
        self._close_engine()
        self.run_check()

    def run_check(self) -> None:
        """The pre-show check for the session's conditions, in a worker (also after a change elsewhere)."""
        s = self.session
        c = s.conditions
        self.readings = f"static {c.static_pa:.2f} Pa, gas {c.temperature_k - 273.15:.1f} °C"
        path = s.sheet.path
        check_static, check_temp = s.static_pa, s.temperature_k
        self._running_static_pa = c.static_pa
        self._checked_text = s.saved_text  # the sheet as saved: what the check reads
        self._deferred = None              # a result waiting for the cue to stop is out of date now
        try:
            log = s.show_log()
        except ShowkitError as exc:  # what was withdrawn stays withdrawn
            self.say(f"the pre-show check cannot run: {exc.line()}", warn=True)
            return
        self.checking = True

        def work(progress):
            return s.preshow_job(path, log, check_static, check_temp)

        self.run_job("preshow", work, self.check_done, "pre-show check: re-deriving every ceiling")

    def sheet_changed(self) -> None:
        """The sheet was edited after the check (any view): follow it at once, then check again.

        A cue gone from the sheet, or whose gain came down, is withdrawn at once;
        a cue playing whose gain came down is brought down to it by the fader.
        """
        engine = self.engine
        gains = {c.id: c.gain_db for c in self.session.sheet.cues}
        held = []
        what, fix = "the cue changed in the sheet since the check", "wait for the pre-show check"
        if engine is not None:
            for k, cue in enumerate(self.cues):
                lower = cue.id not in gains or gains[cue.id] < cue.gain_db - 1e-9
                if lower and engine.startable(k):
                    engine.withdraw(k, what, fix)
                    held.append(cue.id)
            st = engine.status()
            if st.cue_index is not None:
                playing = engine.cues[st.cue_index]
                if playing.id not in gains:
                    engine.fade_out()
                elif gains[playing.id] < playing.gain_db - 1e-9:
                    engine.cap_fader_db(gains[playing.id] - playing.gain_db,
                                        "its gain came down in the sheet")
        self._mark_held(held, "the show changed")
        self.run_check()

    def rig_changed(self) -> None:
        """The rig file changed (the Measure view wrote a fit into it): every cue is checked again.

        The rendered cues were verified on the old rig, so all are held back at once
        and a cue playing is faded out, as for a new gas temperature.
        """
        self.conditions_changed(False, True, why="the rig file changed")

    def conditions_changed(self, static_changed: bool, temperature_changed: bool, recheck: bool = True,
                           why: str | None = None) -> None:
        """Today's conditions changed elsewhere: hold back at once what may no longer fit, then check again.

        A manometer change moves each pressure-limited ceiling by exactly
        20 log10(new/old) dB and leaves the full-scale limit where it is, so a lower
        reading lowers every ceiling by at most that much: a cue whose gain is
        within the lowered bound still fits and stays playable; every other cue is
        withdrawn until the check is back, and a cue playing above the bound is
        brought down to it by the fader (held there).  A new gas temperature moves
        the modes, so every cue is withdrawn and a cue playing is faded out.
        """
        if not self.cues:
            return  # no pre-show check yet: it will use today's conditions
        c = self.session.conditions
        before = self._checked_static_pa
        engine = self.engine
        drop_db = 0.0
        if static_changed and before:
            drop_db = min(0.0, 20.0 * math.log10(c.static_pa / before))
        reason = why or "today's conditions changed"
        what = f"{reason}: the cue is being checked again"
        fix = "wait for the pre-show check (a few seconds)"
        held = []

        def fits(cue) -> bool:
            return (not temperature_changed and cue.ceiling_db is not None
                    and cue.gain_db <= cue.ceiling_db + drop_db + 1e-9)

        if engine is not None:
            for k, cue in enumerate(self.cues):
                if engine.startable(k) and not fits(cue):
                    engine.withdraw(k, what, fix)
                    held.append(cue.id)
            st = engine.status()
            playing = self.cues[st.cue_index] if st.cue_index is not None else None
            if playing is not None and playing.id == engine.cues[st.cue_index].id and not fits(playing):
                if temperature_changed or playing.ceiling_db is None:
                    try:
                        engine.fade_out()
                    except ShowkitError:
                        pass
                    self.say(f"{playing.id}: {why or 'the gas temperature changed'} while it played: "
                                 "fading out until the check says it fits", warn=True)
                else:
                    room = playing.ceiling_db + drop_db - playing.gain_db
                    fader = engine.cap_fader_db(room, f"static {c.static_pa:g} Pa lowered the ceiling")
                    self.say(f"{playing.id}: today's ceiling came down while it played: fader held at "
                                 f"{fader:+.1f} dB", warn=True)
        self._mark_held(held, reason)
        if recheck:
            self.run_check()

    def _mark_held(self, held: list[str], reason: str = "today's conditions changed") -> None:
        """Show at once which cues are held back until the check is back."""
        title = (f"[b]Run the show[/b]  {escape(reason)}: checking again; "
                 + (f"[b]{format_count(len(held), 'cue')} held back[/b] until then: " + escape(", ".join(held))
                    if held else "every cue still fits"))
        self.query_one("#run-title", Static).update(title)
        table = self.query_one(RunTable)
        for cid in held:
            try:
                table.update_cell(cid, "state", Text("HELD", style="bold reverse"))
                table.update_cell(cid, "why", f"{reason}: being checked again")
            except Exception:  # noqa: BLE001 - a row gone from the table: nothing to mark
                pass
        if held:
            self.say(f"{reason}: {format_count(len(held), 'cue')} held back until the "
                         f"pre-show check is back: {', '.join(held)}", warn=True)

    def check_done(self, result) -> None:
        cues, problems = result
        self.checking = False
        self._checked_static_pa = self._running_static_pa
        engine = self.engine
        if engine is not None and engine.busy:
            # a cue plays: the new cues are handed over when it stops; meanwhile every
            # cue that does not fit now is withdrawn as well
            self._deferred = (cues, problems)
            for k, c in enumerate(cues):
                if not c.playable and k < len(engine.cues) and engine.startable(k):
                    what, fix = c.refusal_parts()
                    engine.withdraw(k, what, fix)
            self._show_result(cues)
            return
        self._apply_result(cues, problems)

    def _apply_result(self, cues, problems) -> None:
        self._deferred = None
        self.cues, self.problems = cues, problems
        self.flames = {}
        self._show_result(cues)
        engine = self.engine
        if engine is not None and any(c.playable for c in cues):
            try:
                engine.replace_cues(cues)  # same show, same device: the show position is kept
            except ShowkitError:
                self._close_engine()
                self.open_engine()
                self.say(f"the show's cues changed since the last check: {GO_KEY} starts again at "
                             "the first cue that fits", warn=True)
            self.start_flames()
            self.refresh_now()
        elif any(c.playable for c in cues):
            self.open_engine()
            self.start_flames()
        else:
            self._close_engine()
            self.refresh_now()
            self.set_message("no cue can be played today: lower the gains or lock the sheet again (show view)")

    def _show_result(self, cues) -> None:
        self.fill_table(cues)
        bad = [c for c in cues if not c.playable]
        title = f"[b]Run the show[/b]  pre-show check: {escape(self.readings)}: "
        if bad:
            title += f"[b]{format_count(len(bad), 'cue')} no longer {agree(len(bad), 'fits', 'fit')}[/b] and cannot be started: " + \
                escape(printable(", ".join(c.id for c in bad)))
        else:
            title += f"{format_every(len(cues), 'cue')} {agree(len(cues), 'fits', 'fit')}"
        self.query_one("#run-title", Static).update(title)
        if bad:
            self.say(f"pre-show check: {format_count(len(bad), 'cue')} no longer "
                     f"{agree(len(bad), 'fits', 'fit')} today: {bad[0].refusal()}",
                         warn=True)
        else:
            self.say(f"pre-show check: {format_every(len(cues), 'cue')} {agree(len(cues), 'fits', 'fit')} today; "
                     f"{GO_KEY} starts the first")

    def fill_table(self, cues=None) -> None:
        table = self.query_one(RunTable)
        table.clear()
        for k, c in enumerate(self.cues if cues is None else cues, 1):
            state = Text(c.status if c.playable else c.status.upper(),
                         style="" if c.playable else "bold reverse")
            why = Text(printable(c.label if c.playable else c.message))
            table.add_row(str(k), Text(printable(c.id)), format_time(c.duration_s) if c.playable else "-", f"{c.gain_db:+.1f}",
                          ceiling_text(c.ceiling_db, c.silent, 1), state, c.then, why,
                          key=c.id)

    def start_flames(self) -> None:
        """Flame frames of every playable cue, ahead of the show (a worker)."""
        s = self.session
        rig = s.rig
        cues = [c for c in self.cues if c.playable and c.frames]
        flames_view = self.query_one(RunFlames)
        g = rig.geometry
        flames_view.set_rig(g.hole_positions_m, g.length_m)

        def work(progress):
            return s.cue_flames_job(cues, rig, progress)

        def done(result):
            self.flames = result
            self.refresh_now()

        self.run_job("run-flames", work, done, "predicting the flame row of every cue")

    # ------------------------------------------------------------ the engine
    def open_engine(self) -> None:
        """The engine on the chosen device; a device problem is shown with what to do."""
        from showkit.show.engine import Engine

        self._close_engine()
        log = self.session.show_log()
        try:
            self.engine = Engine(self.cues, log=log)
        except ShowkitError as exc:
            self.set_message(exc.line(), warn=True)
            return
        self._open_device()
        if self._timer is None:
            self._timer = self.set_interval(POLL_S, self.tick, name="run-poll")

    def _open_device(self) -> bool:
        engine = self.engine
        try:
            engine.open(self.session_device())
        except DeviceError as exc:
            if not engine.fault:  # open() logs stream failures itself
                engine.log.write("device_error", None, None, exc.line())
            self.set_message(f"{_no_output(exc)}; then press {RECONNECT_KEY} to connect again", warn=True)
            return False
        dev = engine.device
        self.set_message(f"output: {dev.index} {dev.name} ({dev.hostapi}) at {engine.rate_hz} Hz")
        return True

    def session_device(self):
        return getattr(self.session, "device", None)

    def _close_engine(self) -> None:
        engine, self.engine = self.engine, None
        if engine is not None:
            try:
                if engine.busy:
                    engine.panic()
            finally:
                engine.close()

    def close(self) -> None:
        """Silence and close (on quit)."""
        self._close_engine()

    def tick(self) -> None:
        """Every POLL_S: the engine's events to the screen (the engine logs them), and the display."""
        engine = self.engine
        if engine is None:
            return
        try:
            events = engine.poll()
        except ShowkitError as exc:
            self.set_message(exc.line(), warn=True)
            return
        if self._deferred is not None and not engine.busy and not self.checking:
            self._apply_result(*self._deferred)  # the cue stopped: hand over the new check
            engine = self.engine
            if engine is None:
                return
        if not self.checking and self._checked_text is not None \
                and self.session.saved_text is not self._checked_text \
                and self.session.saved_text != self._checked_text:
            self.sheet_changed()
        for ev in events:
            if ev.kind == "device_error":
                self.set_message(f"{ev.detail}; press {RECONNECT_KEY} to reconnect", warn=True)
            elif ev.kind in ("start", "stop") and ev.cue:
                self.say(f"{ev.cue}: {ev.detail}")
        self.refresh_now()

    def refresh_now(self) -> None:
        now = self.query_one("#run-now", Static)
        flames_view = self.query_one(RunFlames)
        if not flames_view.positions_m and self.session.rig_loaded:
            try:
                g = self.session.rig.geometry
                flames_view.set_rig(g.hole_positions_m, g.length_m)
            except ShowkitError:
                pass
        engine = self.engine
        if engine is None:
            self._now_text = None
            now.update("NOW  -\nNEXT -\nfader -" + ("" if self.cues else "   (run the pre-show check: c)"))
            self.query_one(RunFlames).show(None, 0, 1, "flame row: appears when a cue plays")
            return
        st = engine.status()
        lines = []
        if st.cue_id is not None:
            cue = engine.cues[st.cue_index]
            total = max(cue.duration_s, 1e-9)
            done = int(round(12 * min(1.0, st.elapsed_s / total)))
            lines.append(f"NOW  {st.cue_index + 1} {printable(st.cue_id)}  '{printable(cue.label[:26])}'  "
                         f"{format_time(st.elapsed_s)} elapsed, {format_time(st.left_s)} left "
                         + "█" * done + "·" * (12 - done))
        else:
            lines.append("NOW  -")
        if st.next_id is not None:
            nxt = engine.cues[st.next_index]
            line = (f"NEXT {st.next_index + 1} {printable(st.next_id)}  '{printable(nxt.label[:26])}'  "
                    f"({format_time(nxt.duration_s)})")
            if st.skipped_ids:
                line += f"  passing over {printable(', '.join(st.skipped_ids))}: they do not fit today"
            lines.append(line)
        else:
            lines.append("NEXT (end of show)")
        fader = "silent" if st.fader_db == -math.inf else f"{st.fader_db:+.1f} dB"
        lines.append(f"fader {fader} (0 dB = the cue's locked gain, the most it may play)   "
                     f"{STATE_WORDS.get(st.state, st.state)}")
        text = "\n".join(lines)
        if text != getattr(self, "_now_text", None):
            self._now_text = text
            now.update(Text(text))
        if st.state == State.FAULT and st.message:
            self.set_message(f"{st.message}; press {RECONNECT_KEY} to reconnect", warn=True)
        # the flame row at the play position
        flames = self.query_one(RunFlames)
        if st.cue_id is not None and st.cue_id in self.flames:
            h, rate, lo, hi = self.flames[st.cue_id]
            if h.shape[0]:
                # frame k holds the drive's [k, k + 1) / rate (the preview's rule)
                k = int(min(h.shape[0] - 1, max(0, math.floor(st.elapsed_s * rate + 1e-9))))
                flames.show(h[k], lo, hi, f"predicted flames of {st.cue_id} at {format_time(st.elapsed_s)} "
                            f"(scale: this cue's {lo:.2f} to {hi:.2f} of still height)")
                return
        if st.cue_id is not None:
            flames.show(None, 0, 1, "flame row: being predicted…" if self.job_running("run-flames")
                        else "flame row: not predicted for this cue")
        else:
            flames.show(None, 0, 1, "flame row: appears when a cue plays")

    def set_message(self, text: str, warn: bool = False) -> None:
        if text == self.message:
            return
        self.message = text
        widget = self.query_one("#run-message", Static)
        widget.update(Text(("⚠ " if warn else "") + text))
        widget.set_class(warn, "warn")
        if warn:
            self.say(text, warn=True)

    # ------------------------------------------------------------ operator's keys
    def _engine_or_say(self, need_device: bool = True):
        engine = self.engine
        if engine is None or (need_device and engine.device is None):
            self.say("run the pre-show check first (c)" if not self.cues else
                         self.message if self.message.startswith("no audio output") else
                         f"no audio output: connect the device (D chooses one), then press {RECONNECT_KEY}", warn=True)
            return None
        return engine

    def action_operator(self, action: str) -> None:
        """One operator key (see :mod:`showkit.show.operator_keys`)."""
        if action == "panic":
            self.app.action_panic()
            return
        {"go": self.action_go, "fade": self.action_fade, "fader_down": lambda: self.action_fader(-1),
         "fader_up": lambda: self.action_fader(1), "rearm": self.action_rearm,
         "reconnect": self.action_reconnect}[action]()

    def _refused(self, exc: ShowkitError) -> None:
        self.say(f"refused: {exc.line()}", warn=True)

    def action_go(self, index: int | None = None) -> None:
        engine = self._engine_or_say()
        if engine is None:
            return
        try:
            k = engine.go(index)
        except ShowkitError as exc:
            self._refused(exc)
            return
        self.say(f"GO {k + 1} {engine.cues[k].id} at {engine.cues[k].gain_db:+.1f} dB")
        self.refresh_now()

    def action_start_selected(self) -> None:
        table = self.query_one(RunTable)
        if not self.cues:
            self.say("run the pre-show check first (c)")
            return
        self.action_go(min(max(table.cursor_row, 0), len(self.cues) - 1))

    def action_fade(self) -> None:
        engine = self._engine_or_say()
        if engine is None:
            return
        try:
            engine.fade_out()
        except ShowkitError as exc:
            self._refused(exc)
            return
        self.say(f"fading out over {engine.fade_s:g} s")

    def action_fader(self, direction: int) -> None:
        engine = self._engine_or_say()
        if engine is None:
            return
        try:
            new = engine.fader_step(direction * FADER_STEP_DB)
        except ShowkitError as exc:
            self._refused(exc)
            return
        self.say("fader " + ("silent" if new == -math.inf else f"{new:+.1f} dB"))
        self.refresh_now()

    def action_rearm(self) -> None:
        engine = self._engine_or_say(need_device=False)
        if engine is None:
            return
        engine.rearm()
        self.say(f"re-armed: {GO_KEY} starts the next cue")
        self.refresh_now()

    def action_reconnect(self) -> None:
        if not self.cues:
            self.say("run the pre-show check first (c)")
            return
        if self.engine is None or self.engine.device is None:
            self.open_engine()
            return
        try:
            self.engine.reopen(self.session_device())
        except DeviceError as exc:
            self.set_message(f"{_no_output(exc)}; then press {RECONNECT_KEY} to connect again", warn=True)
            return
        dev = self.engine.device
        self.set_message(f"output: {dev.index} {dev.name} at {self.engine.rate_hz} Hz; {GO_KEY} resumes at the next cue")
        self.say(f"device connected: {GO_KEY} resumes at the next cue")

    def panic(self) -> bool:
        """Panic now (the App's panic key calls this first); True when an engine was there."""
        engine = self.engine
        if engine is None:
            return False
        engine.panic()
        return True
