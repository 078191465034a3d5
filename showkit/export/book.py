"""The printable show book: cover, running order, one page per cue, the tube.

Every number in the book comes from the same functions as `showkit check`
and `showkit ceiling`: the cue states, ceilings and headroom from
:func:`showkit.show.lock.check_cue`; the sound of an ok cue from
:func:`showkit.show.render.render_cue` (verified); the flame rows from
:func:`showkit.analysis.pressure.signal_flames` at the gain the cue plays at;
the most demanding moment (worst hole and time) from the cue's lock; the map
of a music cue from :func:`showkit.export.common.mode_map`; the modes from
:func:`showkit.physics.modes.find_modes`.  Pages are matplotlib figures
written with its PDF backend (vector, text embedded as TrueType so it can be
selected and searched), through a temporary file renamed into place.
"""

from __future__ import annotations

import textwrap
from dataclasses import dataclass, field
from datetime import UTC, datetime
from pathlib import Path

import numpy as np

from showkit.errors import InputError, ShowkitError
from showkit.export.common import mode_map, paper_size, plotting, save_figure
from showkit.export.figures import (WORST, draw_deviation, draw_flame_row, draw_mode_map, draw_mode_shape,
                                    readable)
from showkit.physics.flames import FRAME_RATE_HZ
from showkit.physics.modes import find_modes
from showkit.safesave import replacing
from showkit.safety import CAUTION_TITLE, CAUTIONS
from showkit.show.sheet import AudioSource, describe_source
from showkit.show.status import CueStatus, ceiling_text, headroom_text
from showkit.units import format_count, format_time

#: What the ceiling guarantees and what it assumes (the README's *Ceilings and flames*).
GUARANTEE = (
    "The ceiling of a cue is the largest gain at which the model keeps the gas pressure at every "
    "hole at or above reserve x static pressure above the room's, for the whole cue including the "
    "tube's ring-down after it. A cue is played only at or below its locked ceiling, re-derived "
    "for today's manometer reading.")
ASSUMPTIONS = (
    "It assumes: the rig file describes this tube (length, bore, holes, gas, temperature); the "
    "calibration point and drive model named above hold (away from the reference frequency the speaker "
    "is modelled, not measured, unless a measured response is in the rig file); today's static "
    "pressure is the one given; the tube behaves linearly at these levels. The pressure envelope "
    "errs on the safe side (up to about 2 dB cautious for sharp percussive hits). The ceiling is the "
    "lowest over the rig's loss family (the hole losses from still gas to the gas flowing out, or "
    "the measured losses): it holds for a tube within that family. Losses spread along the tube "
    "(flames, a leaky membrane) lie outside it: a tube ringing at Q 21-26 that way can get ceilings "
    "up to 5.8 dB too high between modes, so measure your tube and start low. A "
    "ceiling is a model's estimate, not a safety device.")

STATE_TEXT = {CueStatus.OK: "ok", CueStatus.OVER: "OVER - NOT PLAYABLE",
              CueStatus.STALE: "STALE - NOT PLAYABLE", CueStatus.ERROR: "ERROR - NOT PLAYABLE"}


@dataclass
class CueEntry:
    """One cue's page: its check and the flame row at its most demanding moment."""

    cue: object
    check: object
    kind_text: str
    height: np.ndarray | None = None
    air_in: np.ndarray | None = None
    worst_hole: int | None = None
    worst_time_s: float | None = None
    flames_note: str = ""
    map: object = None
    map_note: str = ""


@dataclass
class BookData:
    sheet: object
    rig: object
    entries: list
    modes: list
    made_at: str
    problems: list = field(default_factory=list)


def source_text(cue) -> str:
    """The cue's kind and source in words (:func:`showkit.show.sheet.describe_source`)."""
    return describe_source(cue.source)


def cue_flames(sheet, rig, cue, check, signals=None):
    """The flame frames of a cue as it would play (ok: the rendered, verified samples;
    over: its sound at its gain, to show what the excess does); None for stale or error.

    ``signals``: the pass's :class:`showkit.show.sources.SignalMemo` (the cue's sound built once)."""
    from showkit.analysis.pressure import signal_flames
    from showkit.show.render import render_cue
    from showkit.show.sources import cue_signal

    if check.status == CueStatus.OK:
        v = render_cue(sheet, rig, cue, signals)
        return signal_flames(rig, v.samples, v.rate_hz, 0.0)
    if check.status == CueStatus.OVER:
        sig = signals.get(sheet, rig, cue) if signals is not None else cue_signal(sheet, rig, cue)
        return signal_flames(rig, sig.samples, sig.rate_hz, cue.gain_db)
    return None


def collect(sheet, rig, progress=None, maps: bool = True) -> BookData:
    """Everything the book shows, from the domain functions (slow: seconds per music cue)."""
    from showkit.analysis.pressure import frame_lag
    from showkit.show.lock import check_cue
    from showkit.show.sources import SignalMemo

    entries = []
    signals = SignalMemo()  # each cue's sound built once for its check and its flames
    lag = frame_lag(rig) if rig.geometry.hole_count else 0
    maps_by_path = {}
    for k, cue in enumerate(sheet.cues):
        if progress:
            progress(k, len(sheet.cues), cue.id)
        check = check_cue(sheet, rig, cue, signals=signals)
        e = CueEntry(cue, check, source_text(cue))
        try:
            frames = cue_flames(sheet, rig, cue, check, signals)
        except ShowkitError as exc:
            frames = None
            e.flames_note = f"no flame row: {exc.line()}"
        if frames is not None and frames.height is not None and frames.height.shape[0]:
            lock = cue.lock
            hole = lock.worst_hole if lock is not None and lock.worst_hole >= 0 else None
            # the lock's time is from the cue's start (its samples begin at the passage's start);
            # taking the passage's start off again put a cue starting at 11.3 s at "-0:04.7 into
            # the cue", with a blank row (a presenter's book)
            t = lock.worst_time_s if hole is not None else 0.0
            j = int(np.clip(int(np.floor(t * FRAME_RATE_HZ)) + lag, 0, frames.height.shape[0] - 1))
            e.height, e.air_in = frames.height[j], frames.air_in[j]
            e.worst_hole, e.worst_time_s = hole, t
            if hole is None:
                e.flames_note = "the cue is silent: every flame stands still"
        elif not e.flames_note:
            e.flames_note = (f"no flame row: the cue is {check.status} ({check.message})")
        if maps and isinstance(cue.source, AudioSource):
            try:
                path = sheet.audio_path(cue.source)
                if path not in maps_by_path:
                    maps_by_path[path] = mode_map(rig, path)
                e.map = maps_by_path[path].window(cue.source.start_s, cue.source.end_s)
            except ShowkitError as exc:
                e.map_note = f"no map: {exc.line()}"
        entries.append(e)
    if progress:
        progress(len(sheet.cues), len(sheet.cues), None)
    modes = find_modes(rig.model)
    return BookData(sheet, rig, entries, modes,
                    datetime.now(UTC).astimezone().strftime("%Y-%m-%d %H:%M %Z"))


# ---------------------------------------------------------------- pages
def _page(plt, size, landscape=False):
    w, h = size
    return plt.figure(figsize=(h, w) if landscape else (w, h))


def _wrap(text: str, width: int) -> list[str]:
    return textwrap.wrap(text, width) or [""]


def _lines(fig, x, y, lines, size=8, step=None, **kw) -> float:
    """Write lines of text top-down from (x, y) in figure fractions; returns the next y."""
    step = step or size * 1.45 / 72 / fig.get_figheight()
    for line in lines:
        fig.text(x, y, line, fontsize=size, va="top", **kw)
        y -= step
    return y


def cover_page(plt, data: BookData, size):
    sheet, rig, g = data.sheet, data.rig, data.rig.geometry
    fig = _page(plt, size)
    y = _lines(fig, 0.08, 0.95, [sheet.title], size=18, weight="bold")
    y = _lines(fig, 0.08, y - 0.005, [f"Show book made {data.made_at} from {sheet.path.name if sheet.path else 'the sheet'}"],
               size=8)
    counts = {s: sum(1 for e in data.entries if e.check.status == s) for s in CueStatus}
    bad = [e for e in data.entries if e.check.status != CueStatus.OK]
    summary = f"{format_count(len(data.entries), 'cue')}: " + ", ".join(f"{v} {k}" for k, v in counts.items() if v)
    y = _lines(fig, 0.08, y - 0.01, [summary], size=10)
    if bad:
        text = (f"ATTENTION: {format_count(len(bad), 'cue')} cannot be played as the sheet stands: "
                + ", ".join(f"{e.cue.id} ({e.check.status.upper()})" for e in bad))
        for line in _wrap(text, 85):
            fig.text(0.08, y, line, fontsize=10, va="top", weight="bold", color="white",
                     bbox={"facecolor": WORST, "edgecolor": WORST, "pad": 2})
            y -= 0.022
        y -= 0.005
    spacing = (np.diff(g.hole_positions_m).mean() if g.hole_count > 1 else 0.0)
    rig_lines = [
        f"Rig: {rig.name}" + (" (the bundled demo rig)" if sheet.rig == "demo" else f" ({sheet.rig})"),
        f"Tube: {g.length_m:.3f} m long, {g.bore_m * 1e3:.1f} mm bore, wall {g.wall_m * 1e3:.1f} mm",
        (f"Holes: {g.hole_count}, {g.hole_diameter_m * 1e3:.2f} mm diameter, {spacing * 1e3:.1f} mm apart, "
         f"first at {g.hole_positions_m[0] * 1e3:.1f} mm from the speaker end" if g.hole_count else "Holes: none"),
        f"Gas: {rig.fuel} with {rig.air_fraction * 100:g} % air, {rig.temperature_k - 273.15:.1f} C "
        f"(sound speed {rig.gas.sound_speed_m_s:.1f} m/s)",
        "",
        f"Today's conditions: static pressure {rig.static_pa:.2f} Pa above ambient (manometer), "
        f"reserve {rig.reserve:g}",
        f"safe line {rig.reserve * rig.static_pa:.2f} Pa at every hole; ambient {rig.ambient_pa:.0f} Pa",
        "",
        "Every ceiling rests on:",
    ] + ["  " + line for line in _wrap(rig.describe_drive(), 95)]
    y = _lines(fig, 0.08, y - 0.01, rig_lines, size=9)
    y = _lines(fig, 0.08, y - 0.01, ["What a ceiling guarantees"], size=11, weight="bold")
    y = _lines(fig, 0.08, y, _wrap(GUARANTEE, 105), size=8)
    y = _lines(fig, 0.08, y - 0.005, _wrap(ASSUMPTIONS, 105), size=8)
    y = _lines(fig, 0.08, y - 0.015, [CAUTION_TITLE], size=11, weight="bold")
    for c in CAUTIONS:
        wrapped = _wrap(c, 100)
        y = _lines(fig, 0.08, y - 0.004, ["- " + wrapped[0]] + ["  " + w for w in wrapped[1:]], size=8)
    return fig


#: Running-order columns: (title, width in characters, x position as a fraction of the page).
COLUMNS = [("#", 3, 0.03), ("cue", 14, 0.055), ("label", 27, 0.15), ("kind and source", 30, 0.31),
           ("gain dB", 8, 0.485), ("ceiling dB", 10, 0.54), ("headroom", 8, 0.605),
           ("state", 11, 0.66), ("then", 5, 0.745), ("fades s", 9, 0.78), ("notes", 30, 0.835)]


def _row_cells(k, e) -> list[list[str]]:
    c, ch = e.cue, e.check
    ceiling = ceiling_text(ch.ceiling_db, ch.silent)
    head = headroom_text(ch.headroom_db, ch.silent)
    state = STATE_TEXT.get(ch.status, ch.status)
    notes = c.notes
    if ch.status != CueStatus.OK:
        notes = (notes + " / " if notes else "") + ch.message
    cells = [str(k), c.id, c.label, e.kind_text, f"{c.gain_db:+.2f}", ceiling, head, state, c.then,
             f"{c.fade_in_s:g} / {c.fade_out_s:g}", notes]
    return [_wrap(text, w) if i not in (4, 5, 6) else [text] for i, (text, (_, w, _)) in
            enumerate(zip(cells, COLUMNS))]


def running_order_pages(plt, data: BookData, size) -> list:
    pages = []
    rows = [(k, e, _row_cells(k, e)) for k, e in enumerate(data.entries, 1)]
    fig = None
    y = 0.0
    line = 7.0 * 1.4 / 72 / size[0]  # landscape: the page height is the paper's width
    for k, e, cells in rows:
        height = max(len(c) for c in cells) * line + 0.012
        if fig is None or y - height < 0.05:
            fig = _page(plt, size, landscape=True)
            pages.append(fig)
            fig.text(0.03, 0.96, f"Running order: {data.sheet.title}", fontsize=13, weight="bold", va="top")
            fig.text(0.03, 0.925, f"static {data.rig.static_pa:.2f} Pa, reserve {data.rig.reserve:g}; gains and "
                                  "ceilings in dB applied to the sound as recorded; headroom = ceiling - gain",
                     fontsize=7, va="top")
            y = 0.89
            for title, _, x in COLUMNS:
                fig.text(x, y, title, fontsize=7, weight="bold", va="top")
            y -= line + 0.008
        if e.check.status != CueStatus.OK:
            fig.patches.append(plt.Rectangle((0.025, y - height + 0.006), 0.95, height - 0.002,
                                             transform=fig.transFigure, facecolor="#ffd6d6",
                                             edgecolor=WORST, linewidth=1.5))
        for i, (lines, (_, _, x)) in enumerate(zip(cells, COLUMNS)):
            bad = i == 7 and e.check.status != CueStatus.OK
            _lines(fig, x, y, lines, size=7, step=line, weight="bold" if bad or i == 1 else "normal",
                   color=WORST if bad else "black")
        y -= height
    return pages


def cue_page(plt, data: BookData, k: int, e: CueEntry, size):
    fig = _page(plt, size)
    c, ch = e.cue, e.check
    title = f"Cue {k} of {len(data.entries)}: {c.id}" + (f" - {c.label}" if c.label else "")
    y = _lines(fig, 0.08, 0.96, _wrap(title, 60), size=13, weight="bold")
    state = STATE_TEXT.get(ch.status, ch.status)
    if ch.status != CueStatus.OK:
        fig.text(0.08, y, f"{state}: {ch.message}"[:120], fontsize=10, weight="bold", color="white", va="top",
                 bbox={"facecolor": WORST, "edgecolor": WORST, "pad": 2})
        y -= 0.03
    ceiling = ceiling_text(ch.ceiling_db, ch.silent, unit=" dB")
    head = headroom_text(ch.headroom_db, ch.silent, unit=" dB")
    facts = [f"{e.kind_text}",
             f"gain {c.gain_db:+.2f} dB, ceiling {ceiling}, headroom {head}, state {state}",
             f"fade in {c.fade_in_s:g} s, fade out {c.fade_out_s:g} s; then {c.then}" + ("; gain rider on" if c.ride else "")]
    if c.notes:
        facts += _wrap("notes: " + c.notes, 95)
    y = _lines(fig, 0.08, y, facts, size=9)
    g = data.rig.geometry
    top = 0.5
    ax = fig.add_axes((0.1, top + 0.1, 0.84, 0.2))
    if e.height is not None:
        dx = fig.add_axes((0.1, top - 0.05, 0.84, 0.08))
        draw_deviation(dx, g.hole_positions_m, g.length_m, e.height, e.air_in)
        if e.worst_hole is not None:
            moment = (f"at its most demanding moment: hole {e.worst_hole + 1} of {g.hole_count} at "
                      f"{format_time(e.worst_time_s)} into the cue")
        else:
            moment = "(silent cue)"
        draw_flame_row(ax, g.hole_positions_m, g.length_m, e.height, e.air_in, e.worst_hole,
                       title=f"Predicted flame row at the cue's gain {moment}")
        if ch.status == CueStatus.OVER:
            ax.text(0.5, 0.5, "OVER: this is what the excess would do", transform=ax.transAxes, ha="center",
                    color=WORST, fontsize=12, weight="bold", alpha=0.8)
    else:
        ax.axis("off")
        ax.text(0.5, 0.5, "\n".join(_wrap(e.flames_note, 80)), transform=ax.transAxes, ha="center",
                va="center", fontsize=10, color=WORST if ch.status != CueStatus.OK else "black")
    if e.map is not None:
        mx = fig.add_axes((0.22, 0.08, 0.72, 0.3))
        s = c.source
        draw_mode_map(mx, e.map, None, title="Which modes the passage drives, when (darker: harder)",
                      start_s=s.start_s, end_s=s.end_s)
        if e.worst_hole is not None and e.worst_time_s is not None:
            mx.axvline(s.start_s + e.worst_time_s, color=WORST, linewidth=1.0)
            mx.text(s.start_s + e.worst_time_s, 0.98, " most demanding moment", color=WORST, fontsize=7,
                    va="top", transform=mx.get_xaxis_transform(),
                    bbox={"facecolor": "white", "edgecolor": "none", "pad": 1})
    elif e.map_note:
        fig.text(0.08, 0.2, e.map_note, fontsize=8)
    return fig


def tube_pages(plt, data: BookData, size) -> list:
    rig, g = data.rig, data.rig.geometry
    fig = _page(plt, size)
    y = _lines(fig, 0.08, 0.96, [f"The tube: {rig.name}"], size=13, weight="bold")
    y = _lines(fig, 0.08, y, [f"{len(data.modes)} modes below the plane-wave limit "
                              f"({rig.model.plane_wave_limit_hz:.0f} Hz); a pattern needs about 4 holes per "
                              "half-wavelength to be read"], size=8)
    header = f"{'n':>3}  {'freq Hz':>8}  {'note':<5} {'cents':>5}  {'Q':>5}  {'peaks':>5}  {'spacing mm':>10}  pattern"
    rows = [header]
    for m in data.modes:
        spacing = "-" if m.peak_spacing_m is None or m.flame_peaks < 2 else f"{m.peak_spacing_m * 1e3:.0f}"
        q = "-" if m.q is None else f"{m.q:.0f}"
        rows.append(f"{m.n:>3}  {m.frequency_hz:>8.1f}  {m.note:<5} {m.cents:>+5.0f}  {q:>5}  "
                    f"{m.flame_peaks:>5}  {spacing:>10}  {m.pattern}")
    _lines(fig, 0.08, y - 0.01, rows, size=7, family="monospace")
    pages = [fig]
    shown = readable(data.modes)
    per_page = 24
    for first in range(0, len(shown), per_page):
        fig = _page(plt, size)
        fig.text(0.08, 0.975, "Pressure shape of each readable mode along the row of holes",
                 fontsize=10, weight="bold", va="top")
        fig.text(0.08, 0.955, "signed relative pressure at each hole against position from the speaker end, m; "
                              "dotted: the nodes, where the flames stand tallest at safe levels",
                 fontsize=7, va="top")
        grid = fig.add_gridspec(8, 3, left=0.08, right=0.96, top=0.93, bottom=0.05, hspace=0.9, wspace=0.3)
        for i, m in enumerate(shown[first:first + per_page]):
            draw_mode_shape(fig.add_subplot(grid[i // 3, i % 3]), g.hole_positions_m, g.length_m, m)
        pages.append(fig)
    return pages


def _page_names(data: BookData, counts: dict) -> list[str]:
    names = ["cover"] + [f"running-order-{i}" for i in range(1, counts["order"] + 1)]
    names += [f"cue-{k:02d}-{''.join(ch if ch.isalnum() or ch in '-_' else '_' for ch in e.cue.id)}"
              for k, e in enumerate(data.entries, 1)]
    names += ["tube-modes"] + [f"tube-shapes-{i}" for i in range(1, counts["tube"])]
    return names


def write_book(data: BookData, path, paper: str = "a4", png_dir=None) -> dict:
    """Write the book as one PDF (and every page as PNG into ``png_dir``); returns what was written."""
    from matplotlib.backends.backend_pdf import PdfPages

    plt = plotting()
    size = paper_size(paper)
    path = Path(path)
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise InputError("no such folder", str(folder), "create the folder first or give another path")
    if png_dir is not None:
        png_dir = Path(png_dir)
        png_dir.mkdir(parents=True, exist_ok=True)
    order = running_order_pages(plt, data, size)
    tube = tube_pages(plt, data, size)
    pages = [cover_page(plt, data, size)] + order
    pages += [cue_page(plt, data, k, e, size) for k, e in enumerate(data.entries, 1)] + tube
    names = _page_names(data, {"order": len(order), "tube": len(tube)})
    pngs = []
    try:
        with replacing(path, backups=1, suffix=".pdf") as tmp:
            with PdfPages(tmp, metadata={"Title": f"Show book: {data.sheet.title}",
                                         "Subject": "flame tube show book", "Creator": "showkit"}) as pdf:
                for fig in pages:
                    pdf.savefig(fig)
        if png_dir is not None:
            for k, (fig, name) in enumerate(zip(pages, names), 1):
                pngs.append(save_figure(fig, png_dir / f"{k:02d}-{name}.png", dpi=110))
    except OSError as exc:
        raise InputError(f"cannot write the book ({exc.strerror or exc})", str(path),
                         "check the folder is writable") from None
    finally:
        for fig in pages:
            plt.close(fig)
    return {"pdf": path, "pages": len(pages), "png": pngs}


def make_book(sheet, out, paper: str = "a4", png_dir=None, static_pa: float | None = None,
              reserve: float | None = None, progress=None, rig=None) -> dict:
    """Check every cue of a sheet for today's conditions and write its book.

    ``sheet``: a path or a sheet already read; ``rig``: its rig when already read (None:
    read here); today's ``static_pa`` (Pa) and ``reserve`` over it as
    :func:`showkit.show.lock.sheet_for_today` applies them (None keeps the rig's).
    """
    from showkit.show.lock import sheet_for_today

    paper_size(paper)  # a bad paper name or folder fails before the slow work
    folder = Path(out).parent if str(Path(out).parent) else Path(".")
    if not folder.is_dir():
        raise InputError("no such folder", str(folder), "create the folder first or give another path")
    sheet, rig = sheet_for_today(sheet, rig, static_pa, reserve)
    data = collect(sheet, rig, progress)
    result = write_book(data, out, paper, png_dir)
    result["states"] = {e.cue.id: e.check.status for e in data.entries}
    return result
