"""The Measure view: a recording of the sweep analysed, its response drawn, the fit written.

The analysis is :func:`showkit.analysis.measurement.analyse_recording` (the
same as `showkit measure analyse`), run through the session
(:mod:`showkit.ui.measuring`) in a worker with a progress bar; the response curve
drawn is the one the analysis fits (the recording is deconvolved once).
The drawing places those numbers in terminal cells (log frequency across,
level in dB up); measured modes are marked ``▲`` and the fitted model's
modes ``◇`` on their own lines.  Writing the fit goes through
:func:`showkit.rigwrite.update_rig` (checked, atomic, previous file kept as
``.bak``); the bundled demo rig is never changed.
"""

from __future__ import annotations

import math
from pathlib import Path

from rich.markup import escape
from rich.text import Text
from textual.app import ComposeResult
from textual.binding import Binding
from textual.widget import Widget
from textual.widgets import DataTable, Static

from showkit.errors import InputError, ShowkitError
from showkit.printable import printable
from showkit.safety import LEVEL_CAUTION
from showkit.ui.drawing import BLOCKS
from showkit.ui.measuring import Measurement, calibration_refused, is_demo_rig, write_fit
from showkit.ui.messages import RigWritten
from showkit.ui.viewbase import SAFETY_KEYS, SessionView
from showkit.units import format_count

#: Levels more than this far below the response's peak are drawn empty, dB.
PLOT_RANGE_DB = 40.0
PLOT_ROWS = 7
MEASURED_MARK = "▲"
MODEL_MARK = "◇"


def log_columns(freq_hz, lo_hz: float, hi_hz: float, width: int):
    """The column of each frequency on a log axis from ``lo_hz`` to ``hi_hz`` across ``width`` cells."""
    import numpy as np

    f = np.asarray(freq_hz, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        x = np.log(np.maximum(f, 1e-9) / lo_hz) / math.log(hi_hz / lo_hz)
    return np.clip(np.floor(x * width), 0, width - 1).astype(int), (f >= lo_hz) & (f <= hi_hz)


def response_plot(freq_hz, level_db, measured_hz, model_hz, width: int, rows: int = PLOT_ROWS,
                  range_db: float = PLOT_RANGE_DB) -> list[Text]:
    """The response as a column chart in cells, with two mark lines and a frequency axis.

    Parameters
    ----------
    freq_hz, level_db : sequences
        The measured response (Hz; dB, any reference).  Each column shows the
        highest level among the frequencies that fall in it.
    measured_hz, model_hz : sequences of float
        Measured modes (marked ``▲``) and the fitted model's modes (``◇``), Hz.
    width, rows : int
        Cells across and lines of bars.
    range_db : float
        Span from the top of the chart to its floor, dB.
    """
    import numpy as np

    f = np.asarray(freq_hz, dtype=float)
    v = np.asarray(level_db, dtype=float)
    good = np.isfinite(v) & (f > 0)
    if width < 4 or not good.any():
        return [Text(" " * max(width, 0)) for _ in range(rows + 3)]
    f, v = f[good], v[good]
    lo, hi = float(f.min()), float(f.max())
    if hi <= lo:
        hi = lo * 1.01
    cols, inside = log_columns(f, lo, hi, width)
    top = float(v.max())
    cells = np.full(width, -np.inf)
    np.maximum.at(cells, cols[inside], v[inside])
    frac = np.clip((cells - (top - range_db)) / range_db, 0.0, 1.0)
    frac[~np.isfinite(cells)] = 0.0
    lines = []
    for r in range(rows):
        floor = (rows - 1 - r) / rows
        fill = (frac - floor) * rows
        idx = np.where(fill >= 1, 8, np.clip((fill * 8).astype(int), 0, 8))
        lines.append(Text("".join(BLOCKS[i] for i in idx), style="bold"))
    for marks, ch in ((measured_hz, MEASURED_MARK), (model_hz, MODEL_MARK)):
        row = [" "] * width
        m = np.asarray([x for x in marks if x is not None and math.isfinite(x) and lo <= x <= hi], float)
        if m.size:
            for c in log_columns(m, lo, hi, width)[0]:
                row[c] = ch
        lines.append(Text("".join(row), style="bold" if ch == MEASURED_MARK else ""))
    axis = [" "] * width
    for tick in _ticks(lo, hi):
        c = int(log_columns([tick], lo, hi, width)[0][0])
        label = f"{tick:g}"
        if c + len(label) <= width and all(ch == " " for ch in axis[max(0, c - 1):c + len(label) + 1]):
            axis[c:c + len(label)] = list(label)
    lines.append(Text("".join(axis), style="dim"))
    return lines


def _ticks(lo: float, hi: float) -> list[float]:
    out = []
    decade = 10.0 ** math.floor(math.log10(lo))
    while decade <= hi:
        for m in (1, 2, 5):
            t = m * decade
            if lo <= t <= hi:
                out.append(t)
        decade *= 10
    return out


class ResponseDrawing(Widget):
    """The measured response with the measured and fitted modes marked."""

    DEFAULT_CSS = "ResponseDrawing { height: 11; }"

    def __init__(self, **kw):
        super().__init__(**kw)
        self.measurement: Measurement | None = None

    def set_measurement(self, m: Measurement | None) -> None:
        self.measurement = m
        self.refresh()

    def render(self) -> Text:
        width = max(10, self.size.width)
        out = Text()
        m = self.measurement
        if m is None:
            out.append("No measurement yet: press o and give the recording and the sweep it played.\n"
                       "Make the sweep with `showkit measure sweep --out sweep.wav`, play it through "
                       "the tube and record at the cap.", style="italic")
            return out
        fit = m.report["fit"]
        out.append(f"response of {m.recording.name} (dB, top = peak, {PLOT_RANGE_DB:g} dB tall)   "
                   f"{MEASURED_MARK} measured mode   {MODEL_MARK} fitted model"[:width] + "\n", style="italic")
        lines = response_plot(m.freq_hz, m.level_db, [x["frequency_hz"] for x in m.report["modes"]],
                              fit["model_hz"], width)
        for k, line in enumerate(lines):
            out.append(line)
            if k < len(lines) - 1:
                out.append("\n")
        return out


class MeasureTable(DataTable):
    """Measured against modelled modes."""


class MeasureView(SessionView):
    """Open a recording and its sweep, see the response and the fit, write it to the rig."""

    BINDINGS = [
        *SAFETY_KEYS,
        Binding("o", "open", "open recording"),
        Binding("W", "write", "write fit to rig"),
        Binding("P", "export('response_plot')", "response PNG", show=False),
    ]

    def __init__(self, session, **kw):
        super().__init__(session, **kw)
        self.measurement: Measurement | None = None
        self.last_paths = ("recording.wav", "sweep.wav")

    def compose(self) -> ComposeResult:
        yield Static("[b]Measure the tube[/b]  o opens a recording of the sweep", id="measure-title")
        yield ResponseDrawing(id="response-drawing")
        yield MeasureTable(id="measure-table", cursor_type="row", zebra_stripes=False)
        yield Static("", id="measure-fit")
        yield Static(f"CAUTION: {LEVEL_CAUTION}", id="measure-caution")

    def on_mount(self) -> None:
        table = self.query_one(MeasureTable)
        for label, key, width in (("#", "n", 2), ("measured Hz", "f", 11), ("Q", "q", 6),
                                  ("model Hz", "fm", 9), ("cents", "c", 6), ("model Q", "qm", 7),
                                  ("rig file Hz", "f0", 11), ("cents", "c0", 6), ("level dB", "lv", 8)):
            table.add_column(label, key=key, width=width)

    # ------------------------------------------------------------ opening
    def action_open(self) -> None:
        from showkit.ui.dialogs import AskScreen

        def done(values):
            if values:
                self.analyse(values["recording"], values["sweep"])

        rec, sweep = self.last_paths
        self.ask(AskScreen("Analyse a recording of the sweep", [
            ("recording", "recording at the cap (WAV or FLAC)", rec),
            ("sweep", "the sweep that was played (from `showkit measure sweep`)", sweep)],
            note=f"CAUTION: {LEVEL_CAUTION}"), done)

    def _path(self, text: str, what: str) -> Path:
        """A file named in the dialog: absolute, or relative to the current folder, else to the
        show's folder; missing from both, one line naming both folders."""
        p = Path(str(text).strip()).expanduser()
        if p.is_absolute() or p.exists():
            return p
        in_show = self.session.sheet.folder / p
        if in_show.exists():
            return in_show
        raise InputError(f"no such {what} in the current folder ({Path.cwd()}) or the show's folder "
                         f"({self.session.sheet.folder})", str(text).strip(), "give its full path")

    def analyse(self, recording_text: str, sweep_text: str) -> None:
        """Read both files and analyse them in a worker (progress in the status line)."""
        try:
            rec_path = self._path(recording_text, "recording")
            sweep_path = self._path(sweep_text, "sweep file")
        except ShowkitError as exc:
            self.say(exc.line(), warn=True)
            return
        self.last_paths = (str(recording_text).strip(), str(sweep_text).strip())
        s = self.session

        def work(progress):
            return s.measure_job(rec_path, sweep_path, progress)

        self.run_job("measure", work, self.show_measurement, f"analysing {rec_path.name}")

    def show_measurement(self, m: Measurement) -> None:
        self.measurement = m
        self.query_one(ResponseDrawing).set_measurement(m)
        report, fit = m.report, m.report["fit"]
        table = self.query_one(MeasureTable)
        table.clear()
        for k, (mode, after, c1, before, c0) in enumerate(zip(report["modes"], fit["model_hz"],
                                                              fit["residual_cents"], fit["rig_model_hz"],
                                                              fit["before_cents"]), 1):
            qm = fit["model_q"][k - 1] if fit.get("model_q") is not None and k - 1 < len(fit["model_q"]) \
                else None
            table.add_row(str(k), f"{mode['frequency_hz']:.2f}", f"{mode['q']:.1f}", f"{after:.2f}",
                          f"{c1:+.1f}", "-" if qm is None or not math.isfinite(qm) else f"{qm:.1f}",
                          f"{before:.2f}", f"{c0:+.1f}", f"{mode['level_db']:.1f}")
        rec = report["recording"]
        text = (f"sound speed {fit['sound_speed_m_s']:.2f} m/s (rig file: {fit['rig_sound_speed_m_s']:.2f})"
                + (f", end correction {fit['end_correction']:.3f} hole radii" if fit["end_correction"]
                   is not None else "")
                + f"; rms {fit['rms_cents']:.1f} cents after the fit; sweep found {rec['delay_s']:.3f} s in, "
                  f"impulse-to-noise {rec['snr_db']:.0f} dB")
        warnings = report["warnings"]
        if warnings:
            text += "\n" + "\n".join(f"⚠ {w}" for w in warnings)
        self.query_one("#measure-fit", Static).update(Text(text))
        self.query_one("#measure-title", Static).update(
            f"[b]Measure the tube[/b]  {escape(printable(m.recording.name))} with "
            f"{escape(printable(m.sweep.name))} on {escape(printable(m.rig_name))}: {len(report['modes'])} modes"
            "   W writes the fit into the rig file")
        self.say(f"{len(report['modes'])} modes measured; the model was off by "
                     f"{m.rms_before_cents():.1f} cents rms before the fit, {fit['rms_cents']:.1f} after"
                     + (f"; {format_count(len(warnings), 'warning')}" if warnings else ""), warn=bool(warnings))

    def action_export(self, what: str) -> None:
        from showkit.ui import exports

        getattr(exports, what)(self)

    # ------------------------------------------------------------ writing the fit
    def rig_file(self) -> Path | None:
        try:
            return self.session.base_rig().path
        except ShowkitError:
            return None

    def action_write(self) -> None:
        m = self.measurement
        if m is None:
            self.say("nothing to write yet: open a recording first (o)")
            return
        path = self.rig_file()
        if is_demo_rig(path):
            self.say("the bundled demo rig is never changed: copy it to your own rig file, name that "
                     "file as the sheet's rig, then write the fit again (W)", warn=True)
            return
        try:
            backup = write_fit(Path(path), m.report)
        except ShowkitError as exc:
            self.say(exc.line(), warn=True)
            return
        done = f"wrote the fit into {Path(path).name} (previous version kept as {Path(backup).name})"
        self.query_one("#measure-title", Static).update(f"[b]Measure the tube[/b]  {escape(printable(done))}")
        refused = calibration_refused(Path(path))
        # the app reloads the rig and every view follows (the Run view checks again)
        self.post_message(RigWritten(done, None if refused is None else
                                     f"{refused} (showkit measure level --rig {Path(path).name})"))

