"""The plots: flame rows, the time x mode map, the tube's modes and a measured response.

Each ``draw_*`` function draws numbers it is given on a matplotlib axes (no
physics here); each ``*_figure`` function builds a whole figure for
``showkit modes --plot``, ``showkit scan --plot`` and
``showkit measure analyse --plot`` and the book.  matplotlib is imported
lazily, on Agg canvases (:func:`showkit.export.common.plotting`).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from showkit.export.common import ModeMap, mode_map, plotting, save_figure
from showkit.physics.modes import find_modes

#: Colours (named once, used everywhere): flames, air drawn in, the worst hole, passages.
FLAME = "#e8871e"
STILL = "#777777"
AIR = "#1f5fbf"
WORST = "#c00000"
PASSAGE = "#2a7f3f"

#: The default figure size of the command-line plots, inches, and their resolution.
PLOT_SIZE_IN = (10.0, 6.0)
PLOT_DPI = 100


def draw_flame_row(ax, positions_m, length_m: float, height, air_in=None, worst_hole: int | None = None,
                   title: str = "") -> None:
    """The flame row: one bar per hole at its position, relative height (1 = the still flame).

    Holes where air is drawn in (``air_in > 0``) are drawn in the air colour
    and marked under the row; ``worst_hole`` (0-based) gets an arrow.
    """
    x = np.asarray(positions_m, dtype=float)
    h = np.asarray(height, dtype=float)
    air = np.zeros_like(h) if air_in is None else np.asarray(air_in, dtype=float)
    width = 0.7 * (np.min(np.diff(x)) if x.size > 1 else 0.02)
    colours = [AIR if a > 0 else FLAME for a in air]
    ax.bar(x, h, width=width, color=colours, linewidth=0)
    ax.axhline(1.0, color=STILL, linewidth=0.8, linestyle="--")
    ax.set_xlim(0.0, length_m)
    top = max(1.2, float(h.max()) * 1.15 if h.size else 1.2)
    ax.set_ylim(0.0, top)
    ax.set_xlabel("position along the tube from the speaker end, m")
    ax.set_ylabel("flame height / still flame")
    if np.any(air > 0):
        ax.plot(x[air > 0], np.full(int(np.sum(air > 0)), 0.03 * top), "^", color=AIR, markersize=5,
                label="air drawn in")
        ax.legend(loc="upper right", fontsize=7)
    if worst_hole is not None and 0 <= worst_hole < x.size:
        ax.annotate(f"hole {worst_hole + 1}", xy=(x[worst_hole], h[worst_hole]),
                    xytext=(x[worst_hole], top * 0.98), ha="center", va="top", fontsize=7, color=WORST,
                    arrowprops={"arrowstyle": "->", "color": WORST})
    lo, hi = (float(h.min()), float(h.max())) if h.size else (1.0, 1.0)
    facts = f"lowest {lo:.3f}, tallest {hi:.3f} (dashed: the still flame)"
    ax.set_title(f"{title}\n{facts}" if title else facts, fontsize=8)


def draw_deviation(ax, positions_m, length_m: float, height, air_in=None) -> None:
    """The same row as differences from the still flame in per cent, on its own (zoomed) scale."""
    x = np.asarray(positions_m, dtype=float)
    d = 100.0 * (np.asarray(height, dtype=float) - 1.0)
    air = np.zeros_like(d) if air_in is None else np.asarray(air_in, dtype=float)
    width = 0.7 * (np.min(np.diff(x)) if x.size > 1 else 0.02)
    ax.bar(x, d, width=width, color=[AIR if a > 0 else FLAME for a in air], linewidth=0)
    ax.axhline(0.0, color=STILL, linewidth=0.6)
    ax.set_xlim(0.0, length_m)
    span = max(0.5, float(np.max(np.abs(d))) * 1.15 if d.size else 0.5)
    ax.set_ylim(-span, span)
    ax.set_ylabel("% vs still", fontsize=7)
    ax.tick_params(labelsize=6)
    ax.text(0.01, 0.95, "the same row, vertical scale zoomed: difference from the still flame, %",
            transform=ax.transAxes, fontsize=6, va="top")


def draw_mode_map(ax, m: ModeMap, passages=None, title: str = "", start_s: float | None = None,
                  end_s: float | None = None) -> None:
    """The time x mode map: one row per mode, darker where it is driven harder.

    ``passages``: dicts with ``start_s``, ``end_s`` and ``score`` drawn as
    numbered spans under the map (best first, as the scan ranks them).
    """
    from matplotlib.patches import Rectangle

    rows = len(m.modes)
    t = m.times_s
    if rows and t.size:
        t0 = t[0] - m.hop_s / 2
        t1 = t[-1] + m.hop_s / 2
        ax.imshow(m.strength, aspect="auto", origin="lower", cmap="Greys", vmin=0.0, vmax=1.0,
                  extent=(t0, t1, -0.5, rows - 0.5), interpolation="nearest")
        ax.set_yticks(range(rows))
        ax.set_yticklabels([f"{d['n']}  {d['note']}  {d['frequency_hz']:.0f} Hz" for d in m.modes], fontsize=6)
    else:
        ax.text(0.5, 0.5, "no mode is driven", transform=ax.transAxes, ha="center")
    ax.set_ylabel("mode")
    ax.set_xlabel("time in the track, s")
    if start_s is not None or end_s is not None:
        lo = start_s if start_s is not None else (t[0] if t.size else 0.0)
        hi = end_s if end_s is not None else (t[-1] if t.size else 1.0)
        if hi > lo:
            ax.set_xlim(lo, hi)
    if passages:
        # a strip under the rows: each passage numbered (best first) with its score
        ax.set_ylim(-1.4, max(rows, 1) - 0.5)
        for k, p in enumerate(passages, 1):
            shade = PASSAGE if k % 2 else "#5fb072"
            ax.add_patch(Rectangle((p["start_s"], -1.35), p["end_s"] - p["start_s"], 0.75,
                                   facecolor=shade, edgecolor="white", linewidth=0.8))
            ax.text((p["start_s"] + p["end_s"]) / 2, -0.975, f"#{k}  {p['score']:.0f}", ha="center",
                    va="center", fontsize=7, color="white", weight="bold", clip_on=True)
            ax.axvline(p["start_s"], color=PASSAGE, linewidth=0.6, alpha=0.6)
    if title:
        ax.set_title(title, fontsize=9)


def draw_mode_shape(ax, positions_m, length_m: float, mode) -> None:
    """One mode's relative pressure along the row of holes (signed), its nodes marked."""
    x = np.asarray(positions_m, dtype=float)
    ax.plot(x, np.asarray(mode.shape, dtype=float), color=FLAME, linewidth=1.2)
    ax.axhline(0.0, color=STILL, linewidth=0.5)
    for node in np.asarray(getattr(mode, "nodes_m", []), dtype=float):
        ax.axvline(node, color=WORST, linewidth=0.5, linestyle=":")
    ax.set_xlim(0.0, length_m)
    ax.set_ylim(-1.1, 1.1)
    ax.set_title(f"n={mode.n} {mode.frequency_hz:.0f} Hz {mode.note}, {mode.flame_peaks} peaks", fontsize=6)
    ax.tick_params(labelsize=6)


def readable(modes) -> list:
    return [m for m in modes if m.pattern == "readable"]


def modes_figure(rig, modes, size_in=PLOT_SIZE_IN):
    """Mode frequencies and Q (top), each readable mode's pressure shape along the holes (below)."""
    plt = plotting()
    g = rig.geometry
    shown = readable(modes)[:24]
    cols = 6
    shape_rows = max(1, -(-len(shown) // cols))
    fig = plt.figure(figsize=size_in)
    grid = fig.add_gridspec(1 + shape_rows, cols, height_ratios=[1.6] + [1.0] * shape_rows,
                            hspace=1.0, wspace=0.35, top=0.93, bottom=0.05, left=0.07, right=0.98)
    ax = fig.add_subplot(grid[0, :])
    f = np.array([m.frequency_hz for m in modes])
    q = np.array([np.nan if m.q is None else m.q for m in modes])
    colours = [FLAME if m.pattern == "readable" else STILL for m in modes]
    ax.bar(f, np.nan_to_num(q, nan=0.0), width=max(2.0, 0.012 * (f.max() if f.size else 100)), color=colours)
    for m, qq in zip(modes, q):
        ax.text(m.frequency_hz, (0 if np.isnan(qq) else qq), str(m.n), ha="center", va="bottom", fontsize=6)
    ax.set_xlabel("mode frequency, Hz")
    ax.set_ylabel("Q")
    ax.set_title(f"{rig.name}: {len(modes)} modes below the plane-wave limit "
                 f"({rig.model.plane_wave_limit_hz:.0f} Hz); orange: readable pattern", fontsize=9)
    for k, m in enumerate(shown):
        draw_mode_shape(fig.add_subplot(grid[1 + k // cols, k % cols]), g.hole_positions_m, g.length_m, m)
    if not shown:
        fig.text(0.5, 0.2, "no mode with a readable pattern (see showkit modes)", ha="center")
    return fig


def scan_figure(entries, size_in=PLOT_SIZE_IN):
    """One map panel per track: ``entries`` are ``(track dict from the scan, ModeMap)``."""
    plt = plotting()
    n = max(1, len(entries))
    fig, axes = plt.subplots(n, 1, figsize=size_in, squeeze=False)
    for ax, (track, m) in zip(axes[:, 0], entries):
        passages = sorted(track.get("passages") or [], key=lambda p: -p["score"])
        draw_mode_map(ax, m, passages, title=f"{Path(track['path']).name}: score {track['score']:.0f} "
                                             f"(passages numbered best first, with their scores)")
    fig.tight_layout()
    return fig


def response_figure(freq_hz, level_db, report: dict, size_in=PLOT_SIZE_IN):
    """The measured response (dB re its peak, log frequency), measured and fitted modes marked."""
    plt = plotting()
    fig, ax = plt.subplots(figsize=size_in)
    f = np.asarray(freq_hz, dtype=float)
    lv = np.asarray(level_db, dtype=float)
    band = report.get("recording", {}).get("band_hz") or [f[f > 0].min(), f.max()]
    keep = (f >= band[0]) & (f <= band[1])
    ax.semilogx(f[keep], lv[keep], color="black", linewidth=0.8, label="measured response")
    measured = [m["frequency_hz"] for m in report.get("modes", [])]
    fitted = list(report.get("fit", {}).get("model_hz") or [])
    for k, x in enumerate(measured):
        ax.axvline(x, color=FLAME, linewidth=1.0, label="measured modes" if k == 0 else None)
    for k, x in enumerate(fitted):
        ax.axvline(x, color=AIR, linewidth=1.0, linestyle="--", label="fitted model's modes" if k == 0 else None)
    ax.set_ylim(max(-60.0, float(np.min(lv[keep])) if keep.any() else -60.0), 3.0)
    from matplotlib.ticker import FormatStrFormatter

    ax.xaxis.set_major_formatter(FormatStrFormatter("%g"))
    ax.xaxis.set_minor_formatter(FormatStrFormatter("%g"))
    ax.tick_params(axis="x", which="minor", labelsize=6)
    ax.set_xlabel("frequency, Hz")
    ax.set_ylabel("level, dB re the peak")
    fit = report.get("fit", {})
    ax.set_title(f"measured response; sound speed {fit.get('sound_speed_m_s', float('nan')):.2f} m/s, "
                 f"rms {fit.get('rms_cents', float('nan')):.1f} cents after the fit", fontsize=9)
    ax.legend(fontsize=7, loc="lower right")
    ax.grid(True, which="both", linewidth=0.3)
    return fig


def write_plot(fig, path) -> Path:
    """Save a command-line plot at :data:`PLOT_DPI` and close it."""
    plt = plotting()
    try:
        return save_figure(fig, path, dpi=PLOT_DPI)
    finally:
        plt.close(fig)


def plot_modes(rig, path, f_max_hz=None) -> Path:
    """``showkit modes --plot``: the figure of :func:`modes_figure` for the rig's modes."""
    return write_plot(modes_figure(rig, find_modes(rig.model, f_max_hz)), path)


def plot_scan(rig, tracks: list, path, max_tracks: int = 6) -> Path:
    """``showkit scan --plot``: the map of each scanned track (the best ``max_tracks``)."""
    entries = [(t, mode_map(rig, t["path"])) for t in tracks if t.get("error") is None][:max_tracks]
    size = (PLOT_SIZE_IN[0], max(PLOT_SIZE_IN[1], 3.0 * len(entries)))
    return write_plot(scan_figure(entries, size), path)


def response_level_db(response) -> np.ndarray:
    """A response's magnitude in dB re its peak (the Measure view draws the same)."""
    mag = np.abs(np.asarray(response))
    with np.errstate(divide="ignore"):
        return 20 * np.log10(np.maximum(mag, 1e-30) / max(float(mag.max()), 1e-30))


def plot_response(freq_hz, level_db, report: dict, path) -> Path:
    """``showkit measure analyse --plot``."""
    return write_plot(response_figure(freq_hz, level_db, report), path)
