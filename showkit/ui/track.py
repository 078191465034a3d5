"""The Track view: which modes a track drives when, its passages, and the flames at a cursor."""

from __future__ import annotations

from pathlib import Path

from rich.markup import escape
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.widget import Widget
from textual.widgets import DataTable, Static

from showkit.errors import ShowkitError
from showkit.printable import printable
from showkit.ui.drawing import flame_rows, hole_columns, mode_map, span_strip
from showkit.ui.messages import AuditionReady, CueAdded
from showkit.ui.viewbase import SAFETY_KEYS, SessionView
from showkit.units import format_count, format_semitones
from showkit.units import format_time as _clock  # the one m:ss.s formatter

#: Cursor steps, s.
STEP_S = 0.5
#: Transposition steps of the Track view, cents: whole semitones (+/-) and fine steps (</>).
SEMITONE_CENTS = 100
FINE_STEP_CENTS = 25
#: Farthest transposition the view tries, cents (an octave either way).
MAX_SHIFT_CENTS = 1200
FLAME_LINES = 4
#: Screen rows the Track view leaves for everything but the map: top bar, status line,
#: footer (3), title (2), cursor facts (2), flames (5), the passages' caption (1) and the passage
#: table (header + 4).
MAP_OTHER_ROWS = 18


def title_text(a, old=None) -> str:
    """The Track view's title (markup) for analysis ``a``; ``old`` is the one it replaces.

    Every transposition on it (the shift shown, the scan's suggestion, both to the cent)
    is written by :func:`showkit.units.format_semitones`, as ``showkit scan`` writes it.
    """
    before = "" if old is None or old.path != a.path or old.transpose == a.transpose else \
        f" (was {old.score:.1f} at {format_semitones(old.transpose)})"
    return (f"[b]{escape(printable(a.path.name))}[/b]  {_clock(a.duration_s)}  "
            f"transposed {format_semitones(a.transpose)}  score {a.score:.1f}{before}  "
            f"ceiling {a.ceiling_db:+.1f} dB  "
            + (f"scan suggests {format_semitones(a.suggestion_semitones)}"
               + ("" if abs(a.transpose - a.suggestion_semitones) < 0.005 else " (s tries it)")
               if a.suggestion_semitones else "")
            + ("" if a.map_modes else "  (no mode map: " + a.note + ")"))


def passage_caption(a) -> str:
    """The line over the passage table: which shift its scores and modes are for."""
    if not a.transpose:
        return "passages, best first: scores and modes as recorded"
    return (f"passages, best first: scores and modes transposed {format_semitones(a.transpose)} "
            "(what the flames would show at that shift); ~ceiling and contrast as recorded")


class TrackMap(Widget, can_focus=True):
    """The time x mode map with the passages under it and the cursor as a column."""

    DEFAULT_CSS = "TrackMap { height: auto; }"

    def __init__(self, **kw):
        super().__init__(**kw)
        self.analysis = None
        self.cursor_s = 0.0
        self.selected = None
        self.mark_in = None
        self.mark_out = None

    def get_content_height(self, container, viewport, width: int) -> int:
        if self.analysis is None:
            return 1
        shown = len(self.shown_modes())
        return shown + 2 + (1 if shown < len(self.analysis.map_modes) else 0)

    def shown_modes(self) -> list[int]:
        """Indices (into ``map_modes``) of the mode rows drawn: all that fit the terminal,
        the most strongly driven first to stay, so the passage table keeps its rows."""
        import numpy as np

        a = self.analysis
        n = len(a.map_modes)
        # the rest of the screen: bars, title, cursor facts, flames, 5 rows of passages
        room = max(2, self.screen.size.height - MAP_OTHER_ROWS - 2)
        if n <= room:
            return list(range(n))
        room = max(1, room - 1)  # a row says how many are not drawn
        energy = np.asarray(a.map_energy, dtype=float).reshape(n, -1).sum(axis=1)
        keep = np.sort(np.argsort(-energy, kind="stable")[:room])
        return [int(i) for i in keep]

    def render(self) -> Text:
        a = self.analysis
        label_w = 4
        width = max(8, self.size.width - label_w)
        out = Text()
        if a is None:  # the title above already says "No track open yet"
            return out
        # the map's strength is absolute (0 to 1): drawn from 1 % to all of the band's sound
        lines = (mode_map(a.map_energy, a.map_times_s, a.duration_s, width, self.cursor_s, lo=0.01, hi=1.0)
                 if a.map_modes else [])
        shown = set(self.shown_modes()) if a.map_modes else set()
        count = len(a.map_modes)
        for i, (n, line) in enumerate(zip(reversed(a.map_modes), lines)):
            if count - 1 - i not in shown:
                continue
            out.append(f"{n:>3} ", style="dim")
            out.append(line)
            out.append("\n")
        hidden = count - len(shown)
        if hidden > 0:  # never silently: a fresh user missed the modes a passage held
            out.append(f"    +{format_count(hidden, 'weaker mode')} not drawn: a taller terminal "
                       "shows every mode\n", style="dim")
        spans = [(p["start_s"], p["end_s"]) for p in a.passages]
        out.append(" ps ", style="dim")
        out.append(span_strip(spans, a.duration_s, width, self.selected, self.cursor_s))
        out.append("\n")
        out.append(" io ", style="dim")
        marks = [" "] * width
        for t, ch in ((self.mark_in, "("), (self.mark_out, ")")):
            if t is not None and a.duration_s > 0:
                marks[int(min(width - 1, t / a.duration_s * width))] = ch
        if self.mark_in is not None and self.mark_out is not None and a.duration_s > 0:
            c0 = int(min(width - 1, self.mark_in / a.duration_s * width)) + 1
            c1 = int(min(width - 1, self.mark_out / a.duration_s * width))
            for c in range(c0, c1):
                marks[c] = "═"
        out.append("".join(marks))
        return out


class CursorFlames(Widget):
    """The predicted flame row at the cursor (one bar per hole, ! where air is drawn in)."""

    DEFAULT_CSS = "CursorFlames { height: 5; }"

    def __init__(self, **kw):
        super().__init__(**kw)
        self.height_row = None
        self.air_row = None
        self.positions_m: list[float] = []
        self.length_m = 1.0
        self.scale = (None, None)

    def set_row(self, height, air, positions_m, length_m, scale) -> None:
        self.height_row, self.air_row = height, air
        self.positions_m, self.length_m, self.scale = positions_m, length_m, scale
        self.refresh()

    def render(self) -> Text:
        width = max(10, self.size.width - 2)
        out = Text()
        if self.height_row is None:
            return out
        cols = hole_columns(self.positions_m, self.length_m, width)
        for r in flame_rows(self.height_row, self.air_row, cols, width, FLAME_LINES, *self.scale):
            out.append(" ")
            out.append(r)
            out.append("\n")
        out.append("▐", style="bold")
        out.append("─" * width, style="dim")
        out.append("▌", style="bold")
        return out


class PassageTable(DataTable):
    """The passages found by the scan, best first."""


class TrackView(SessionView):
    """Track analysis: map, passages, cursor flames; add passages to the show."""

    BINDINGS = [
        *SAFETY_KEYS,
        Binding("o", "open", "open"),
        Binding("left", "step(-1)", "◀", show=False),
        Binding("right", "step(1)", "▶", show=False),
        Binding("shift+left", "step(-10)", "◀◀", show=False),
        Binding("shift+right", "step(10)", "▶▶", show=False),
        Binding("home", "to_edge(0)", "start", show=False),
        Binding("end", "to_edge(1)", "end", show=False),
        Binding("b", "passage(-1)", "prev passage"),
        Binding("f", "passage(1)", "next passage"),
        Binding("left_parenthesis", "mark('in')", "in here", show=False),
        Binding("right_parenthesis", "mark('out')", "out here", show=False),
        Binding("c", "add_cue", "add cue"),
        Binding("s", "suggested", "scan's shift"),
        Binding("plus,equals_sign", f"transpose({SEMITONE_CENTS})", "semitone up"),
        Binding("minus", f"transpose({-SEMITONE_CENTS})", "semitone down"),
        Binding("greater_than_sign", f"transpose({FINE_STEP_CENTS})", f"{FINE_STEP_CENTS} cents up", show=False),
        Binding("less_than_sign", f"transpose({-FINE_STEP_CENTS})", f"{FINE_STEP_CENTS} cents down", show=False),
        Binding("0", "as_recorded", "as recorded", show=False),
        Binding("V", "export('track_preview')", "preview video", show=False),
        Binding("P", "export('track_map')", "map PNG", show=False),
    ]

    def __init__(self, session, **kw):
        super().__init__(session, **kw)
        self.path: Path | None = None
        self.wanted = ""
        self.analysis = None
        self.transpose_cents = 0   # the shift tried, whole cents
        self.selection = None   # (start_s, end_s, ceiling_db or None, contrast or None)

    def compose(self) -> ComposeResult:
        yield Static("", id="track-title")
        yield TrackMap(id="track-map")
        yield Static("", id="cursor-facts")
        yield CursorFlames(id="cursor-flames")
        yield Static("", id="passage-caption")
        yield PassageTable(id="passage-table", cursor_type="row")

    def on_mount(self) -> None:
        t = self.query_one(PassageTable)
        for label, key, width in (("#", "n", 2), ("from", "a", 7), ("to", "b", 7), ("score", "score", 5),
                                  ("modes", "modes", 12), ("~ceiling", "ceiling", 8), ("contrast %", "contrast", 10)):
            t.add_column(label, key=key, width=width)
        self.query_one("#track-title", Static).update(
            "No track open yet: o opens a track (demo tracks are offered).")

    # ------------------------------------------------------------ opening and analysis
    def action_open(self) -> None:
        from showkit.ui.dialogs import AskScreen

        choices = self.session.tracks.choices()
        names = "  ".join(c.removeprefix("demo:") for c in choices[:6])

        def done(values):
            if values and values["path"].strip():
                self.open_track(values["path"].strip())

        first = str(self.path or (choices[0] if choices else ""))
        self.ask(AskScreen("Open a track", [("path", "audio file (FLAC, WAV, OGG ...) or a demo name",
                                              first)],
                            note=f"the show's tracks and the demo tracks: {names}" if names else ""), done)

    def open_track(self, path) -> None:
        """Open a track by name or path; it is found and analysed in the background."""
        self.path = None
        self.wanted = str(path)
        self.transpose_cents = 0
        self.selection = None
        m = self.query_one(TrackMap)
        m.mark_in = m.mark_out = None
        m.selected = None
        m.cursor_s = 0.0
        self.analyse()

    def analyse(self) -> None:
        s = self.session
        wanted, shift = str(self.path or self.wanted), self.transpose_cents

        def work(progress):
            return s.tracks.analysis_job(wanted, shift, progress)

        def done(analysis):
            if wanted != str(self.path or self.wanted) or shift != self.transpose_cents:
                return
            self.path = analysis.path
            self.show_analysis(analysis)

        name = Path(wanted.removeprefix("demo:")).name
        self.query_one("#track-title", Static).update(Text(f"{printable(name)}  analysing…"))

        def failed(exc):
            if wanted == str(self.path or self.wanted) and shift == self.transpose_cents:
                # the shift asked for was never shown: back to the one on screen (or none)
                self.transpose_cents = int(round(self.analysis.transpose * 100)) if self.analysis else 0
                self.query_one("#track-title", Static).update(
                    Text(f"{printable(name)}  not analysed: {exc.what} (details in the status line)"))

        self.run_job("track", work, done,
                     f"analysing {name}" + (f" transposed {format_semitones(shift / 100.0)}" if shift else ""),
                     failed=failed)

    def conditions_changed(self) -> None:
        if self.path is not None:
            self.analyse()

    def show_analysis(self, a) -> None:
        old = self.analysis
        self.analysis = a
        m = self.query_one(TrackMap)
        m.analysis = a
        m.cursor_s = min(m.cursor_s, a.duration_s)
        t = self.query_one(PassageTable)
        t.clear()
        for k, p in enumerate(a.passages, 1):
            t.add_row(str(k), _clock(p["start_s"]), _clock(p["end_s"]), f"{p['score']:.1f}",
                      a.modes_cell(p),
                      f"{p['ceiling_db']:+.1f}" if p.get("ceiling_db") is not None else "",
                      f"{100 * p['contrast']:.1f}" if p.get("contrast") is not None else "", key=str(k))
        self.query_one("#track-title", Static).update(title_text(a, old))
        self.query_one("#passage-caption", Static).update(passage_caption(a))
        m.refresh(layout=True)
        if a.passages and m.selected is None:
            self.select_passage(0)
        self.update_cursor()
        self.say(f"{a.path.name}: {len(a.passages)} passages; f/b move between them, c adds one")

    # ------------------------------------------------------------ cursor
    def update_cursor(self) -> None:
        a = self.analysis
        if a is None:
            return
        m = self.query_one(TrackMap)
        k = a.frame_at(m.cursor_s)
        rig = self.session.rig
        g = rig.geometry
        self.query_one(CursorFlames).set_row(a.height[k], a.air_in[k], g.hole_positions_m, g.length_m,
                                             (a.height_lo, a.height_hi))
        notes = a.notes_at(m.cursor_s)
        sel = self.selection
        chosen = "" if m.selected is None or m.selected >= len(a.passages) else (
            f"passage {m.selected + 1} (score {a.passages[m.selected]['score']:.1f}) ")
        sel_text = "" if sel is None else (
            f"   {chosen or 'selection '}{_clock(sel[0])}-{_clock(sel[1])}"
            + (f" ceiling {sel[2]:+.1f} dB, contrast {100 * sel[3]:.1f}%" if sel[2] is not None else " (measuring…)"))
        air = int((a.air_in[k] > 0).sum())
        self.query_one("#cursor-facts", Static).update(
            f"at {_clock(m.cursor_s)}  flame contrast {100 * a.contrast_frame[k]:.1f}%  "
            f"(bars {a.height_lo:.2f}-{a.height_hi:.2f} of still height)"
            + (f"  air drawn in at {air} holes" if air else "")
            + f"   notes: {notes or '—'}{sel_text}")
        m.refresh()

    def action_step(self, steps: int) -> None:
        if self.analysis is None:
            return
        m = self.query_one(TrackMap)
        m.cursor_s = min(max(0.0, m.cursor_s + steps * STEP_S), self.analysis.duration_s)
        self.update_cursor()

    def action_to_edge(self, end: int) -> None:
        if self.analysis is None:
            return
        self.query_one(TrackMap).cursor_s = self.analysis.duration_s if end else 0.0
        self.update_cursor()

    # ------------------------------------------------------------ passages and selection
    def select_passage(self, k: int) -> None:
        a = self.analysis
        if a is None or not a.passages:
            return
        k = max(0, min(len(a.passages) - 1, k))
        p = a.passages[k]
        m = self.query_one(TrackMap)
        m.selected = k
        m.cursor_s = p["start_s"]
        m.mark_in, m.mark_out = p["start_s"], p["end_s"]
        t = self.query_one(PassageTable)
        if t.row_count > k:
            t.move_cursor(row=k)
        # the table's ~ceiling is the scan's best estimate (it ranks passages); a cue is made
        # from the ceiling over the loss family, measured now as for a hand-set selection
        self.measure_selection(p["start_s"], p["end_s"])
        self.update_cursor()

    def action_passage(self, delta: int) -> None:
        m = self.query_one(TrackMap)
        if self.analysis is None or not self.analysis.passages:
            self.say("no passages")
            return
        # in time order (the table lists them best first): the next or previous passage from the
        # selected one, or from the cursor when none is selected
        ps = self.analysis.passages
        order = sorted(range(len(ps)), key=lambda i: (ps[i]["start_s"], i))
        if m.selected is not None and m.selected in order:
            k = order[(order.index(m.selected) + delta) % len(order)]
        elif delta > 0:
            k = next((i for i in order if ps[i]["start_s"] > m.cursor_s + 1e-6), order[0])
        else:
            k = next((i for i in reversed(order) if ps[i]["start_s"] < m.cursor_s - 1e-6), order[-1])
        self.select_passage(k)

    def on_data_table_row_selected(self, event: DataTable.RowSelected) -> None:
        if isinstance(event.data_table, PassageTable):
            self.select_passage(event.cursor_row)

    def action_mark(self, which: str) -> None:
        if self.analysis is None:
            return
        m = self.query_one(TrackMap)
        if which == "in":
            m.mark_in = m.cursor_s
            if m.mark_out is not None and m.mark_out <= m.mark_in:
                m.mark_out = None
        else:
            m.mark_out = m.cursor_s
            if m.mark_in is not None and m.mark_in >= m.mark_out:
                m.mark_in = None
        m.selected = None
        if m.mark_in is not None and m.mark_out is not None:
            self.measure_selection(m.mark_in, m.mark_out)
        else:
            self.selection = None
            self.say(f"{which} set at {_clock(m.cursor_s)}; set the other end with "
                         + ("')'" if which == "in" else "'('"))
        self.update_cursor()

    def measure_selection(self, start_s: float, end_s: float) -> None:
        s = self.session
        path = self.path
        self.selection = (start_s, end_s, None, None)

        def work(progress):
            return s.tracks.passage_job(path, start_s, end_s)

        def done(report):
            if self.selection and self.selection[:2] == (start_s, end_s):
                self.selection = (start_s, end_s, report.ceiling_db, report.contrast)
                self.update_cursor()
                self.say(f"selection {_clock(start_s)}-{_clock(end_s)}: ceiling {report.ceiling_db:+.1f} dB, "
                             f"contrast {100 * report.contrast:.1f}%; c adds it to the show")

        self.run_job("passage", work, done, "measuring the selection's ceiling")

    def action_add_cue(self) -> None:
        if self.analysis is None or self.selection is None:
            self.say("select a passage first (f/b, or ( and ) at the cursor)")
            return
        start, end, ceiling, _ = self.selection
        if ceiling is None:
            self.say("the selection's ceiling is still being measured; try again in a moment")
            return
        if self.transpose_cents:
            self.say("cues play the track as recorded: the transposition is not added to the cue", warn=True)
        try:
            cue = self.session.add_passage(self.path, start, end, ceiling)
        except ShowkitError as exc:
            self.say(exc.line(), warn=True)
            return
        self.post_message(CueAdded(cue))

    def action_transpose(self, delta_cents: int) -> None:
        """Try the track shifted ``delta_cents`` further (whole or fine steps)."""
        if self.path is None and not self.wanted:
            self.say("open a track first (o)")
            return
        self.set_transpose(self.transpose_cents + int(delta_cents))

    def action_suggested(self) -> None:
        """Try the scan's suggested shift exactly (to the cent)."""
        a = self.analysis
        if a is None:
            self.say("open a track first (o)")
            return
        if not a.suggestion_semitones:
            self.say("the scan suggests no shift for this track: it lays its notes on the modes as well "
                     "as any shift would")
            return
        self.set_transpose(int(round(100.0 * a.suggestion_semitones)))

    def action_as_recorded(self) -> None:
        if self.path is None and not self.wanted:
            return
        self.set_transpose(0)

    def set_transpose(self, cents: int) -> None:
        """Show the track shifted by ``cents`` (within +-MAX_SHIFT_CENTS), analysed in the background."""
        cents = max(-MAX_SHIFT_CENTS, min(MAX_SHIFT_CENTS, int(cents)))
        if cents == self.transpose_cents and self.analysis is not None:
            self.say(f"already shown at {format_semitones(cents / 100.0)}")
            return
        self.transpose_cents = cents
        self.analyse()

    def action_export(self, what: str) -> None:
        from showkit.ui import exports

        getattr(exports, what)(self)

    def audition(self) -> None:
        if self.selection is None or self.path is None:
            self.say("select a passage to audition")
            return
        start, end, ceiling, _ = self.selection
        s = self.session
        path = self.path
        self.run_job("render", lambda progress: s.tracks.audition_job(path, start, end),
                     lambda rendered: self.post_message(AuditionReady(rendered)),
                     "rendering the passage at a safe gain for the audition")
