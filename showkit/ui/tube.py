"""The Tube view: the rig drawn to scale as a row of flames, its conditions and its modes."""

from __future__ import annotations

from rich.markup import escape
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.widget import Widget
from textual.widgets import DataTable, Static

from showkit.printable import printable
from showkit.safety import LEVEL_CAUTION
from showkit.ui.drawing import flame_picture
from showkit.ui.messages import ConditionsEntered, CueAdded
from showkit.ui.viewbase import SAFETY_KEYS, SessionView

FLAME_LINES = 5


class TubeDrawing(Widget):
    """The tube to scale with the predicted flame row of the selected mode above it."""

    DEFAULT_CSS = "TubeDrawing { height: 8; }"

    def __init__(self, **kw):
        super().__init__(**kw)
        self.positions_m: list[float] = []
        self.length_m = 1.0
        self.height_row = None
        self.air_row = None
        self.caption = ""

    def set_rig(self, positions_m, length_m: float) -> None:
        self.positions_m, self.length_m = list(positions_m), float(length_m)
        self.refresh()

    def set_flames(self, height, air_in, caption: str) -> None:
        self.height_row, self.air_row, self.caption = height, air_in, caption
        self.refresh()

    def render(self) -> Text:
        return flame_picture(self.caption, self.height_row, self.air_row, self.positions_m,
                             self.length_m, max(10, self.size.width - 2), FLAME_LINES, with_ruler=True)


class ModeTable(DataTable):
    """The modes of the tube."""


class TubeView(SessionView):
    """Rig facts, the tube drawing and the modes table."""

    BINDINGS = [
        *SAFETY_KEYS,
        Binding("d", "temperature", "gas temperature"),
        Binding("c", "tone_cue", "tone cue on mode"),
    ]

    def compose(self) -> ComposeResult:
        yield Static("", id="rig-facts")
        yield TubeDrawing(id="tube-drawing")
        yield ModeTable(id="mode-table", cursor_type="row")
        yield Static(f"CAUTION: {LEVEL_CAUTION}", id="tube-caution")  # the flame rows are at the safe level

    def on_mount(self) -> None:
        t = self.query_one(ModeTable)
        for label, key, width in (("mode", "n", 4), ("Hz", "hz", 8), ("note", "note", 9), ("Q", "q", 6),
                                  ("flames", "peaks", 6), ("spacing", "spacing", 8), ("pattern", "pattern", 11)):
            t.add_column(label, key=key, width=width)
        if self.session.modes:  # built after the modes were found: today's rig and modes at once
            self.show_rig()

    def show_rig(self) -> None:
        """The rig's facts and modes as the session has them now, and the selected mode's flame row."""
        self.refresh_facts()
        self.show_modes(self.session.modes)
        mode = self.selected_mode()
        if mode is not None:
            self.show_mode_flames(mode)

    def conditions_changed(self, new_modes: bool) -> None:
        """Today's conditions changed: the facts at once; the flame row now, or with the new modes."""
        self.refresh_facts()
        mode = self.selected_mode()
        if not new_modes and mode is not None:
            self.show_mode_flames(mode)

    def show_mode_flames(self, mode) -> None:
        """The predicted flame row of ``mode`` at its safe level (a worker the first time)."""
        s = self.session
        drawing = self.query_one(TubeDrawing)
        known = s.cached_mode_flames(mode)
        if known is not None:
            h, air, ceiling = known
            drawing.set_flames(h, air, _flames_caption(mode, h, air, ceiling))
            return

        def work(progress):
            return s.mode_flames_job(mode)

        def done(result):
            h, air, ceiling = result
            if self.selected_mode() is not None and self.selected_mode().n == mode.n:
                drawing.set_flames(h, air, _flames_caption(mode, h, air, ceiling))
            self.say(f"mode {mode.n}: flame row predicted at its safe level {ceiling:+.1f} dB")

        self.run_job("flames", work, done, f"predicting the flame row of mode {mode.n}")

    def refresh_facts(self) -> None:
        try:
            rig = self.session.rig
        except Exception as exc:  # a bad rig file is already reported by the app
            self.query_one("#rig-facts", Static).update(f"rig not loaded: {exc}")
            return
        g = rig.geometry
        temp_c = rig.temperature_k - 273.15
        marks = []
        if self.session.static_pa is not None:
            marks.append("static: today's reading")
        if self.session.temperature_k is not None:
            marks.append("temperature: today's")
        self.query_one("#rig-facts", Static).update(
            f"[b]{escape(printable(rig.name))}[/b]  {g.length_m * 1000:.0f} mm long, bore {g.bore_m * 1000:.0f} mm, "
            f"{g.hole_count} holes of {g.hole_diameter_m * 1000:.1f} mm\n"
            f"gas {rig.fuel} ({rig.air_fraction * 100:.0f} % air) at {temp_c:.1f} °C   "
            f"static {rig.static_pa:.1f} Pa   reserve {rig.reserve * 100:.0f} %"
            + (f"   ({', '.join(marks)})" if marks else "") + "\n"
            f"calibration: {rig.describe_drive().removeprefix('calibration ')}")
        self.query_one(TubeDrawing).set_rig(g.hole_positions_m, g.length_m)

    def show_modes(self, modes) -> None:
        t = self.query_one(ModeTable)
        keep = t.cursor_row
        t.clear()
        for m in modes:
            t.add_row(str(m.n), f"{m.frequency_hz:.2f}", f"{m.note} {m.cents:+.0f}c",
                      "-" if m.q is None else f"{m.q:.0f}", str(m.flame_peaks),
                      # one peak has nothing to stand apart from (as `showkit modes` shows it)
                      "-" if m.peak_spacing_m is None or m.flame_peaks < 2 else f"{m.peak_spacing_m * 1000:.0f} mm",
                      m.pattern, key=str(m.n))
        if modes:
            t.move_cursor(row=min(max(keep, 0), len(modes) - 1))

    def selected_mode(self):
        modes = self.session.modes
        if not modes:
            return None
        row = min(max(self.query_one(ModeTable).cursor_row, 0), len(modes) - 1)
        return modes[row]

    def on_data_table_row_highlighted(self, event: DataTable.RowHighlighted) -> None:
        mode = self.selected_mode()
        if mode is not None:
            self.show_mode_flames(mode)

    def action_temperature(self) -> None:
        from showkit.ui.dialogs import AskScreen

        rig = self.session.rig

        def done(values):
            if values:
                self.post_message(ConditionsEntered(temperature=values["temperature"]))

        self.ask(AskScreen("Gas temperature in the tube today",
                            [("temperature", "temperature (e.g. 18 C, 291 K, 64 F)",
                              f"{rig.temperature_k - 273.15:.1f} C")],
                            note="Modes, ceilings and the run view's check follow at once; tone "
                                 "and glide cues move to today's modes; no lock goes stale."), done)

    def action_tone_cue(self) -> None:
        mode = self.selected_mode()
        if mode is None:
            self.say("the modes are still being computed")
            return
        cue = self.session.add_tone(mode.n, 10.0, after=None)
        self.post_message(CueAdded(cue))


def _flames_caption(mode, height, air, ceiling_db: float) -> str:
    """The caption under a mode's flame row; ``!`` is explained only where a hole draws air in."""
    lo, hi = float(min(height)), float(max(height))
    drawing_air = sum(1 for a in air if a > 0)
    tail = (f"; ! marks the {drawing_air} holes that draw air in" if drawing_air
            else "; no hole draws air in")
    return (f"mode {mode.n}, {mode.frequency_hz:.1f} Hz, at its safe level {ceiling_db:+.1f} dB: "
            f"flames {lo:.3f} to {hi:.3f} of still height{tail}")
