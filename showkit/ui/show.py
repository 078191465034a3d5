"""The Show view: the cue list with gain, ceiling, a headroom bar and status."""

from __future__ import annotations

from rich.markup import escape
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.widgets import DataTable, Static

from showkit import units
from showkit.errors import ShowkitError
from showkit.printable import printable
from showkit.safety import LEVEL_CAUTION
from showkit.show.editing import GAIN_STEP_DB
from showkit.show.sheet import describe_source
from showkit.show.status import SILENCE, CueStatus, ceiling_text
from showkit.ui.drawing import headroom_bar
from showkit.ui.messages import CueAdded, LockRequested
from showkit.ui.viewbase import SAFETY_KEYS, SessionView

STATUS_MARK = {CueStatus.OK: "ok", CueStatus.OVER: "OVER", CueStatus.STALE: "stale", CueStatus.ERROR: "error",
               None: "…"}


class CueTable(DataTable):
    """The cue list (keeps DataTable's cursor keys)."""


class ShowView(SessionView):
    """Cue list, details of the selected cue, and the level caution."""

    BINDINGS = [
        *SAFETY_KEYS,
        Binding("plus,equals_sign", "gain(1)", "gain +0.5"),
        Binding("minus", "gain(-1)", "gain -0.5"),
        Binding("G", "type_gain", "type gain"),
        Binding("e", "edit", "edit cue"),
        Binding("n", "toggle_then", "wait/next"),
        Binding("left_square_bracket", "move(-1)", "move up", show=False),
        Binding("right_square_bracket", "move(1)", "move down", show=False),
        Binding("t", "add_tone", "+tone"),
        Binding("w", "add_glide", "+glide", show=False),
        Binding("p", "add_pause", "+pause", show=False),
        # Delete (never a letter: no operator key, and no key of `showkit run`, deletes a cue);
        # the line that says it was deleted says how to bring it back (u, at once)
        Binding("delete", "delete", "delete cue", key_display="del", show=False),
        Binding("u", "app.undo", "undo", show=False),
        Binding("L", "relock", "re-lock"),
        Binding("B", "export('book')", "show book PDF", show=False),
        Binding("V", "export('sheet_preview')", "preview video", show=False),
    ]

    def compose(self) -> ComposeResult:
        yield Static("", id="show-title")
        table = CueTable(id="cue-table", cursor_type="row", zebra_stripes=False)
        yield table
        yield Static("", id="cue-detail")
        yield Static(f"CAUTION: {LEVEL_CAUTION}", id="level-caution")

    _id_width = 0  # the cue column's width now (0: no columns yet)

    def on_mount(self) -> None:
        self.refresh_table()

    def _columns(self, table: DataTable, id_width: int) -> None:
        table.clear(columns=True)
        self._id_width = id_width
        table.add_column("#", key="n", width=2)
        table.add_column("cue", key="id", width=id_width)
        table.add_column("gain", key="gain", width=6)
        table.add_column("ceiling", key="ceiling", width=7)
        table.add_column("headroom", key="bar", width=10)
        table.add_column("state", key="state", width=5)
        table.add_column("then", key="then", width=4)
        table.add_column("label", key="label", width=22)
        table.add_column("source", key="source")

    # ------------------------------------------------------------ drawing
    def selected_id(self) -> str | None:
        table = self.query_one(CueTable)
        cues = self.session.sheet.cues
        if not cues:
            return None
        row = min(max(table.cursor_row, 0), len(cues) - 1)
        return cues[row].id

    def refresh_table(self, select: str | None = None) -> None:
        table = self.query_one(CueTable)
        keep = select or self.selected_id()
        sheet = self.session.sheet
        width = cue_id_width([c.id for c in sheet.cues])
        if width != self._id_width:
            self._columns(table, width)
        else:
            table.clear()
        for k, cue in enumerate(sheet.cues, 1):
            check = self.session.checks.get(cue.id)
            status = None if check is None else check.status
            ceiling = "" if check is None or check.ceiling_db is None else ceiling_text(check.ceiling_db,
                                                                                         check.silent, 1)
            head = None if check is None else check.headroom_db
            bar = Text("") if check is not None and check.silent else headroom_bar(head)  # no level: no bar
            state = Text(STATUS_MARK[status],
                         style="bold reverse" if status in (CueStatus.OVER, CueStatus.ERROR) else
                         ("italic" if status == CueStatus.STALE else ""))
            table.add_row(str(k), Text(short_id(printable(cue.id), width)), f"{cue.gain_db:+.1f}", ceiling, bar,
                          state, cue.then, Text(printable(cue.label)), Text(printable(describe_source(cue.source, short=True))),
                          key=cue.id)
        if keep is not None and keep in [c.id for c in sheet.cues]:
            table.move_cursor(row=sheet.index(keep))
        self.query_one("#show-title", Static).update(self._title())
        self.refresh_detail()

    def _title(self) -> str:
        s = self.session
        checks = list(s.checks.values())
        counts = {k: sum(1 for c in checks if c.status == k) for k in CueStatus}
        waiting = "checking…" if s.rig_problem is None else "rig problem (status line)"
        state = "  ".join(f"{v} {k}" for k, v in counts.items() if v) or waiting
        return (f"[b]{escape(printable(s.sheet.title))}[/b]  ({units.format_count(len(s.sheet.cues), 'cue')}: {state})  "
                f"{escape(printable(s.sheet.path.name))}")

    def refresh_detail(self) -> None:
        cid = self.selected_id()
        detail = self.query_one("#cue-detail", Static)
        if cid is None:
            detail.update("No cues yet: t adds a tone, w a glide, p a pause; the Track view adds passages.")
            return
        cue = self.session.sheet.cue(cid)
        check = self.session.checks.get(cid)
        waiting = ("checking…" if self.session.rig_problem is None
                   else "not checked: the rig file cannot be read (status line)")
        msg = waiting if check is None else ui_message(check.message)
        silent = check is not None and check.silent  # the note says it plays nothing: no ceiling to give
        ceiling = "" if check is None or check.ceiling_db is None or silent else \
            f", ceiling {ceiling_text(check.ceiling_db, unit=' dB')}"
        rests = ""
        if check is not None and check.ceiling_db is not None and not silent and self.session.rig_loaded:
            rests = f"; rests on {self.session.rig.describe_drive(brief=True)}"
        detail.update(f"[b]{escape(printable(cue.id))}[/b]  gain {cue.gain_db:+.2f} dB{ceiling}, fade in {cue.fade_in_s:g} s, "
                      f"out {cue.fade_out_s:g} s, then {cue.then}{', ride' if cue.ride else ''}\n"
                      f"{escape(printable(msg + rests))}")

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        self.refresh_detail()

    # ------------------------------------------------------------ actions
    def _cue_or_say(self) -> str | None:
        cid = self.selected_id()
        if cid is None:
            self.say("the show has no cues yet")
        return cid

    def action_gain(self, direction: int) -> None:
        cid = self._cue_or_say()
        if cid is None:
            return
        change = self.session.nudge_gain(cid, direction * GAIN_STEP_DB)
        self.refresh_table(cid)
        self.say(change.note or f"{cid}: gain {change.gain_db:+.2f} dB (saved)",
                     warn=change.stopped)

    def action_type_gain(self) -> None:
        cid = self._cue_or_say()
        if cid is None:
            return
        cue = self.session.sheet.cue(cid)
        ceiling = self.session.ceiling_of(cid)
        check = self.session.checks.get(cid)
        top = ("unknown until locked" if ceiling is None else
               f"{SILENCE}, it plays nothing" if check is not None and check.silent else f"{ceiling:+.2f} dB")

        def done(values):
            if not values:
                return
            try:
                change = self.session.set_gain(cid, units.gain_db(values["gain"], "gain"))
            except ShowkitError as exc:
                self.say(exc.line(), warn=True)
                return
            self.refresh_table(cid)
            self.say(change.note or f"{cid}: gain {change.gain_db:+.2f} dB (saved)", warn=change.stopped)

        from showkit.ui.dialogs import AskScreen

        self.ask(AskScreen(f"Gain of {printable(cid)} (ceiling today: {top})",
                            [("gain", "gain, dB", f"{cue.gain_db:g}")],
                            note=f"CAUTION: {LEVEL_CAUTION}"), done)

    def action_edit(self) -> None:
        cid = self._cue_or_say()
        if cid is None:
            return
        cue = self.session.sheet.cue(cid)
        from showkit.ui.dialogs import AskScreen

        def done(values):
            if not values:
                return
            try:
                then = _typed(values["then"], cue.then).strip().lower()
                new = self.session.edit_cue(cid, label=_typed(values["label"], cue.label),
                                            fade_in_s=_seconds(values["fade_in"]),
                                            fade_out_s=_seconds(values["fade_out"]), then=then,
                                            notes=_typed(values["notes"], cue.notes))
            except (ShowkitError, ValueError) as exc:
                self.say(exc.line() if isinstance(exc, ShowkitError) else str(exc), warn=True)
                return
            self.refresh_table(cid)
            self.say(f"{cid}: changed (saved)")
            if self.session.checks.get(cid) is None:
                self.post_message(LockRequested([new.id]))

        # the boxes show text from the file as printable (no control characters reach the terminal)
        self.ask(AskScreen(f"Cue {printable(cid)}", [
            ("label", "label", printable(cue.label)), ("fade_in", "fade in, s", f"{cue.fade_in_s:g}"),
            ("fade_out", "fade out, s", f"{cue.fade_out_s:g}"),
            ("then", "then (wait or next)", printable(cue.then)),
            ("notes", "notes", printable(cue.notes))]), done)

    def action_toggle_then(self) -> None:
        cid = self._cue_or_say()
        if cid is None:
            return
        cue = self.session.sheet.cue(cid)
        self.session.edit_cue(cid, then="next" if cue.then == "wait" else "wait")
        self.refresh_table(cid)
        self.say(f"{cid}: then {self.session.sheet.cue(cid).then} (saved)")

    def action_move(self, delta: int) -> None:
        cid = self._cue_or_say()
        if cid is None:
            return
        self.session.move(cid, delta)
        self.refresh_table(cid)
        self.say(f"{cid}: now cue {self.session.sheet.index(cid) + 1} (saved)")

    def action_add_tone(self, mode: int | None = None) -> None:
        from showkit.ui.dialogs import AskScreen

        def done(values):
            if not values:
                return
            try:
                cue = self.session.add_tone(_mode_number(values["mode"], "mode number"), _seconds(values["duration"]),
                                            after=self.selected_id())
            except (ShowkitError, ValueError) as exc:
                self.say(exc.line() if isinstance(exc, ShowkitError) else f"cannot read that: {exc}", warn=True)
                return
            self.post_message(CueAdded(cue))

        self.ask(AskScreen("New tone cue", [("mode", "mode number", "3" if mode is None else str(mode)),
                                             ("duration", "duration, s", "10")]), done)

    def action_add_glide(self) -> None:
        from showkit.ui.dialogs import AskScreen

        def done(values):
            if not values:
                return
            try:
                cue = self.session.add_glide(_mode_number(values["from"], "from mode"),
                                             _mode_number(values["to"], "to mode"), _seconds(values["duration"]),
                                             after=self.selected_id())
            except (ShowkitError, ValueError) as exc:
                self.say(exc.line() if isinstance(exc, ShowkitError) else f"cannot read that: {exc}", warn=True)
                return
            self.post_message(CueAdded(cue))

        self.ask(AskScreen("New glide cue", [("from", "from mode", "2"), ("to", "to mode", "8"),
                                              ("duration", "duration, s", "15")]), done)

    def action_add_pause(self) -> None:
        from showkit.ui.dialogs import AskScreen

        def done(values):
            if not values:
                return
            try:
                cue = self.session.add_pause(_seconds(values["duration"]), after=self.selected_id())
            except (ShowkitError, ValueError) as exc:
                self.say(exc.line() if isinstance(exc, ShowkitError) else f"cannot read that: {exc}", warn=True)
                return
            self.post_message(CueAdded(cue))

        self.ask(AskScreen("New pause (talk) cue", [("duration", "duration, s", "20")]), done)

    def action_delete(self) -> None:
        cid = self._cue_or_say()
        if cid is None:
            return
        label = self.session.sheet.cue(cid).label
        self.session.delete(cid)
        self.refresh_table()
        self.say(f"deleted cue {cid} ({label}) and saved -- press u (or ctrl+z) now to bring it back",
                     warn=True)

    def action_relock(self) -> None:
        self.post_message(LockRequested(None, everything=True))

    def action_export(self, what: str) -> None:
        from showkit.ui import exports

        getattr(exports, what)(self)


def ui_message(text: str) -> str:
    """The check's message with the UI's key instead of the command line."""
    import re

    return re.sub(r"run `showkit lock [^`]*` to re-lock", "press L to lock it", text)


def _typed(value: str, before: str) -> str:
    """What a text box gives back: the file's own text when the box still shows it as printed."""
    return before if value == printable(before) else value


def _mode_number(text: str, field: str) -> int:
    """A mode number typed in a dialog (a whole number), or one line saying what to type."""
    from showkit.errors import InputError

    try:
        return int(text.strip())
    except ValueError:
        raise InputError(f"a mode is a whole number, got {printable(text.strip())!r}", field,
                         "type a mode number as the Tube view lists them, e.g. 3") from None


def _seconds(text: str) -> float:
    return units.duration_s(units.number_or_text(text.strip()), "duration")


#: The cue column's width: the longest id, within these bounds (characters).
CUE_ID_WIDTH = (14, 24)


def cue_id_width(ids: list[str]) -> int:
    """The cue column's width for these ids (:data:`CUE_ID_WIDTH`)."""
    lo, hi = CUE_ID_WIDTH
    return max(lo, min(hi, max((len(printable(i)) for i in ids), default=lo)))


def short_id(cue_id: str, width: int) -> str:
    """``cue_id`` in ``width`` characters: cut in the middle, keeping its end, where cues made
    from one track differ ("chorale-organ-1", "chorale-organ-2")."""
    if len(cue_id) <= width:
        return cue_id
    tail = max(3, width // 3)
    return cue_id[:width - tail - 1] + "…" + cue_id[-tail:]
