"""What the exports share: matplotlib set-up, paper sizes, safe writing, the time x mode map.

The time x mode map comes from the scan through ONE adapter,
:func:`mode_map`, into a plain form (see :class:`ModeMap`); everything that
draws a map reads only that form.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

from showkit.errors import InputError
from showkit.safesave import replacing

#: Paper sizes, inches (A4: ISO 216, 210 x 297 mm; US Letter: ANSI/ASME Y14.1, 8.5 x 11 in).
PAPER_IN = {"a4": (210 / 25.4, 297 / 25.4), "letter": (8.5, 11.0)}

#: A mode counts as hit in a map frame when its strength is at least this (0-1 of the strongest).


class _Plotting:
    """The few pyplot calls the exports use, on matplotlib's object API (Agg canvases).

    No global figure registry: safe in the UI's worker threads, nothing to close.
    """

    def __init__(self):
        import matplotlib
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.figure import Figure
        from matplotlib.patches import Rectangle

        # TrueType (42) embeds the font so text stays selectable and extractable
        matplotlib.rcParams["pdf.fonttype"] = 42
        matplotlib.rcParams["ps.fonttype"] = 42
        matplotlib.rcParams["axes.unicode_minus"] = False
        self._figure, self._canvas, self.Rectangle = Figure, FigureCanvasAgg, Rectangle

    def figure(self, figsize=(6.4, 4.8), dpi: int = 100):
        fig = self._figure(figsize=figsize, dpi=dpi)
        self._canvas(fig)
        return fig

    def subplots(self, nrows: int = 1, ncols: int = 1, figsize=(6.4, 4.8), squeeze: bool = True):
        fig = self.figure(figsize)
        return fig, fig.subplots(nrows, ncols, squeeze=squeeze)

    def close(self, fig) -> None:
        """Nothing to release (no pyplot registry); kept so callers read like pyplot."""


_PLOTTING: list = []


def plotting() -> _Plotting:
    """matplotlib on Agg canvases without pyplot, made once (imports matplotlib lazily)."""
    if not _PLOTTING:
        _PLOTTING.append(_Plotting())
    return _PLOTTING[0]


def paper_size(name: str) -> tuple[float, float]:
    key = str(name).strip().lower()
    if key not in PAPER_IN:
        raise InputError(f"unknown paper size {name!r}", "--paper", "give a4 or letter")
    return PAPER_IN[key]


def save_figure(fig, path, dpi: int = 100) -> Path:
    """Write a figure (PNG, PDF or SVG by the name's ending) via a temporary file and rename."""
    path = Path(path)
    suffix = path.suffix.lower() or ".png"
    if suffix not in (".png", ".pdf", ".svg"):
        raise InputError(f"cannot write a picture as {suffix!r}", str(path), "name the file .png, .pdf or .svg")
    folder = path.parent if str(path.parent) else Path(".")
    if not folder.is_dir():
        raise InputError("no such folder", str(folder), "create the folder first or give another path")
    try:
        with replacing(path, backups=1, suffix=suffix) as tmp:
            fig.savefig(tmp, dpi=dpi, format=suffix[1:])
    except OSError as exc:
        raise InputError(f"cannot write the picture ({exc.strerror or exc})", str(path),
                         "check the folder is writable") from None
    return path


def png_size(path) -> tuple[int, int]:
    """Width and height of a PNG file from its header, pixels."""
    with open(path, "rb") as f:
        head = f.read(24)
    if head[:8] != b"\x89PNG\r\n\x1a\n":
        raise ValueError(f"{path} is not a PNG file")
    return int.from_bytes(head[16:20], "big"), int.from_bytes(head[20:24], "big")


# ---------------------------------------------------------------- the time x mode map
@dataclass
class ModeMap:
    """A time x mode map in the scan's map form.

    ``hop_s`` (frame step, s), ``times_s`` (frames), ``modes`` (rows: dicts with
    ``n``, ``frequency_hz``, ``note``), ``strength`` (rows x frames, 0 to 1),
    ``hit`` (rows x frames, bool), ``notes_hz`` (per frame: the dominant pitches, Hz)
    and the track ``score``.
    """

    hop_s: float
    times_s: np.ndarray
    modes: list
    strength: np.ndarray
    hit: np.ndarray
    notes_hz: list
    score: float | None = None

    def to_json(self) -> dict:
        return {"hop_s": self.hop_s, "times_s": self.times_s.tolist(), "modes": self.modes,
                "strength": self.strength.tolist(), "hit": self.hit.tolist(), "notes_hz": self.notes_hz}

    def window(self, start_s: float | None, end_s: float | None) -> ModeMap:
        """The frames from ``start_s`` to ``end_s`` (times kept as in the file)."""
        t = self.times_s
        keep = np.ones(t.size, bool)
        if start_s is not None:
            keep &= t >= start_s - 1e-9
        if end_s is not None:
            keep &= t <= end_s + 1e-9
        return ModeMap(self.hop_s, t[keep], self.modes, self.strength[:, keep], self.hit[:, keep],
                       [x for x, k in zip(self.notes_hz, keep) if k], self.score)




def mode_map(rig, path, max_rows: int = 10) -> ModeMap:
    """The time x mode map of a track: THE adapter from the scan to :class:`ModeMap`.

    Reads :func:`showkit.analysis.scan.track_frames` (the map that ``scan --map``
    writes and the Track view draws) and keeps at most ``max_rows`` modes, those
    held longest (all the modes hit, when fewer).
    """
    from showkit.analysis.scan import track_frames

    frames = track_frames(rig, path)
    data = frames["map"]
    strength = np.asarray(data["strength"], dtype=float).reshape(len(data["modes"]), -1)
    hit = np.asarray(data["hit"], dtype=bool).reshape(strength.shape)
    keep = np.argsort(-hit.sum(axis=1), kind="stable")[:max_rows]
    keep = np.sort(keep)
    times = np.asarray(data["times_s"], dtype=float)
    modes = [data["modes"][int(i)] for i in keep]
    return ModeMap(float(data["hop_s"]), times, modes, strength[keep], hit[keep],
                   [list(row) for row in data["notes_hz"]], frames["score"])
