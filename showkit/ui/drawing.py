"""Text drawings for the terminal UI: flame rows, headroom bars, the time x mode map.

Display only: these functions place numbers that the model computed into
terminal cells (block characters, so they read without colour too); they
compute nothing about the tube.
"""

from __future__ import annotations

import math

from rich.text import Text

#: Eighth blocks, empty to full, for bars drawn upwards.
BLOCKS = " ▁▂▃▄▅▆▇█"
#: Shades for the map, empty to full.
SHADES = " ·░▒▓█"


def hole_columns(positions_m, length_m: float, width: int) -> list[int]:
    """The terminal column of each hole when the tube is drawn to scale across ``width`` cells."""
    if width <= 1 or length_m <= 0:
        return [0 for _ in positions_m]
    return [min(width - 1, max(0, int(round(p / length_m * (width - 1))))) for p in positions_m]


def flame_rows(height, air_in, columns: list[int], width: int, rows: int,
               lo: float | None = None, hi: float | None = None,
               style: str = "bold", air_style: str = "reverse") -> list[Text]:
    """A row of flames as ``rows`` lines of bars, one bar per hole column.

    Parameters
    ----------
    height : sequence of float
        Relative flame height per hole (from the flame model).
    air_in : sequence of float or None
        Fraction of the frame with air drawn in, per hole; holes with any are
        marked with ``!`` on the bottom line.
    columns : list of int
        Column of each hole (:func:`hole_columns`).
    lo, hi : float
        Heights drawn as empty and full bars (default: the row's own range,
        so that the pattern is visible; the caller prints the scale).
    """
    h = [float(v) for v in height]
    if not h:
        return [Text(" " * width) for _ in range(rows)]
    hi = max(h) if hi is None else hi
    # a flat row (all flames alike) is drawn full, a pattern is stretched to be seen
    lo = min(min(h), hi - 0.05) if lo is None else lo
    span = hi - lo if hi - lo > 1e-12 else 1.0
    level = [0.0] * width
    used = [False] * width
    air = [False] * width
    for k, c in enumerate(columns):
        v = min(1.0, max(0.0, (h[k] - lo) / span))
        # a hole always shows at least a small flame while it burns
        v = max(v, 1.0 / (8 * rows))
        if not used[c] or v > level[c]:
            level[c] = v
        used[c] = True
        if air_in is not None and float(air_in[k]) > 0.0:
            air[c] = True
    lines = []
    for r in range(rows):
        floor = (rows - 1 - r) / rows
        line = Text()
        for c in range(width):
            if not used[c]:
                line.append(" ")
                continue
            fill = (level[c] - floor) * rows
            idx = 8 if fill >= 1 else max(0, int(fill * 8))
            ch = BLOCKS[idx]
            if r == rows - 1 and air[c]:
                line.append("!", style=air_style)
            else:
                line.append(ch, style=style)
        lines.append(line)
    return lines


def tube_line(columns: list[int], width: int) -> Text:
    """The tube body under the flames: a hole mark at each hole's column."""
    cells = ["─"] * width
    for c in columns:
        cells[c] = "┴"
    return Text("".join(cells), style="dim")


def ruler(length_m: float, width: int) -> Text:
    """Metre marks under the tube, to scale."""
    cells = [" "] * width
    if width < 2 or length_m <= 0:
        return Text("".join(cells))
    step = 0.5 if length_m <= 4 else 1.0
    x = 0.0
    while x <= length_m + 1e-9:
        c = int(round(x / length_m * (width - 1)))
        label = f"{x:g} m" if x == 0 else f"{x:g}"
        for i, ch in enumerate(label):
            if c + i < width:
                cells[c + i] = ch
        x += step
    return Text("".join(cells), style="dim")


def headroom_bar(headroom_db: float | None, width: int = 10, full_db: float = 20.0) -> Text:
    """Headroom below the ceiling as a bar: full at ``full_db`` or more, empty at 0 (or over)."""
    if headroom_db is None or not math.isfinite(headroom_db):
        return Text("?" * 0 + "·" * width, style="dim")
    if headroom_db < 0:
        return Text("OVER".ljust(width, "×"), style="bold reverse")
    frac = min(1.0, headroom_db / full_db)
    eighths = int(round(frac * width * 8))
    full, part = divmod(eighths, 8)
    body = "█" * full + (BLOCKS[part] if part and full < width else "")
    return Text(body.ljust(width, "·"), style="bold" if headroom_db >= 3 else "bold underline")


def mode_map(energy, times_s, duration_s: float, width: int, cursor_s: float | None = None,
             lo: float | None = None, hi: float | None = None) -> list[Text]:
    """The time x mode map: one line per mode (top: highest), one cell per time slice.

    Parameters
    ----------
    energy : 2-D sequence, shape (modes, frames)
        How strongly each mode is driven per analysis frame (any non-negative
        unit; drawn on a log scale between ``lo`` and ``hi``).
    times_s : sequence of float
        Time of each frame, s.
    duration_s : float
        Length of the track, s (the map spans it).
    cursor_s : float
        The cursor's time, drawn as a highlighted column.
    """
    import numpy as np

    e = np.asarray(energy, dtype=float)
    t = np.asarray(times_s, dtype=float)
    modes, frames = e.shape if e.ndim == 2 else (0, 0)
    lines = []
    if width < 1 or modes == 0 or frames == 0 or duration_s <= 0:
        return [Text(" " * max(width, 0)) for _ in range(modes)]
    col = np.clip((t / duration_s * width).astype(int), 0, width - 1)
    cells = np.zeros((modes, width))
    np.maximum.at(cells.T, col, e.T)
    with np.errstate(divide="ignore"):
        logv = np.log10(np.maximum(cells, 1e-30))
    top = float(np.max(logv)) if hi is None else math.log10(max(hi, 1e-30))
    bottom = top - 3.0 if lo is None else math.log10(max(lo, 1e-30))
    scale = np.clip((logv - bottom) / max(top - bottom, 1e-9), 0.0, 1.0)
    idx = np.rint(scale * (len(SHADES) - 1)).astype(int)
    cursor_col = None if cursor_s is None else int(min(width - 1, max(0, cursor_s / duration_s * width)))
    for m in range(modes - 1, -1, -1):
        line = Text()
        for c in range(width):
            ch = SHADES[idx[m, c]]
            line.append(ch, style="reverse" if c == cursor_col else "")
        lines.append(line)
    return lines


def span_strip(spans, duration_s: float, width: int, selected: int | None = None,
               cursor_s: float | None = None) -> Text:
    """Passages as numbered spans along the time axis (the selected one highlighted)."""
    cells = [" "] * width
    styles = [""] * width
    if duration_s > 0 and width > 0:
        for k, (a, b) in enumerate(spans):
            c0 = int(min(width - 1, max(0, a / duration_s * width)))
            c1 = int(min(width - 1, max(c0, b / duration_s * width - 1)))
            for c in range(c0, c1 + 1):
                cells[c] = "━"
                styles[c] = "bold reverse" if k == selected else "bold"
            label = str(k + 1)
            for i, ch in enumerate(label):
                if c0 + i <= c1:
                    cells[c0 + i] = ch
        if cursor_s is not None:
            c = int(min(width - 1, max(0, cursor_s / duration_s * width)))
            if cells[c] == " ":
                cells[c] = "▲"
    text = Text()
    for ch, st in zip(cells, styles):
        text.append(ch, style=st)
    return text


def flame_picture(caption: str, height, air_in, positions_m, length_m: float, width: int,
                  lines: int, lo: float | None = None, hi: float | None = None,
                  with_ruler: bool = False) -> Text:
    """The tube drawn as a row of flames under a caption (empty holes when ``height`` is None).

    Shared by the Tube and Run views: ``caption`` on top, ``lines`` of flame
    bars (one per hole), the pipe with its holes, and optionally a metre ruler.
    """
    cols = hole_columns(positions_m, length_m, width)
    out = Text()
    out.append(caption[:width + 2] + "\n", style="italic")
    if height is None:
        marks = set(cols)
        rows = [Text(" " * width) for _ in range(lines - 1)] + \
            [Text("".join("▴" if c in marks else " " for c in range(width)), style="dim")]
    else:
        rows = flame_rows(height, air_in, cols, width, lines, lo=lo, hi=hi)
    for r in rows:
        out.append(" ")
        out.append(r)
        out.append("\n")
    out.append("▐", style="bold")
    out.append(tube_line(cols, width))
    out.append("▌", style="bold")
    if with_ruler:
        out.append("\n ")
        out.append(ruler(length_m, width))
    return out
