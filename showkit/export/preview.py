"""The flame preview video: the row of flames the model predicts, with the show's sound.

A timeline of *segments* (one per cue, or one for a track) carries the flame
frames of :func:`showkit.analysis.pressure.signal_flames` (a cue's rendered,
verified samples, as `showkit render` makes them) or
:func:`~showkit.analysis.pressure.passage_flames` (a track at a gain no
higher than its ceiling).  The flame model's frame rate is 30 per second
(:data:`showkit.physics.flames.FRAME_RATE_HZ`), so each video frame shows one
flame frame; the responses' taper delay is taken out
(:func:`~showkit.analysis.pressure.frame_lag`).  A cue that may not be played
(stale, over, error) is a short silent card saying so, never sound.

Frames are drawn with numpy into an RGB array (no plot per frame): a
background made once per segment, the flames as one masked copy, text from a
glyph atlas that matplotlib renders once.  They are piped raw to the ffmpeg
that ships inside imageio-ffmpeg (H.264, yuv420p) with the rendered sound as
a temporary WAV (AAC), written to a temporary file renamed into place.

**Scale.** At true scale the still flame is :attr:`Layout.unit_px` pixels
tall and a flame of relative height ``h`` is ``h`` times that.  With
``magnify = N`` the difference from the still flame is drawn N times larger,
``unit_px * (1 + N (h - 1))``, and every frame says so.
"""

from __future__ import annotations

import math
import tempfile
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np

from showkit.errors import InputError, ShowkitError
from showkit.export.common import plotting
from showkit.physics.flames import FRAME_RATE_HZ
from showkit.safesave import replacing
from showkit.show.status import SILENT_MESSAGE, CueStatus
from showkit.units import format_count, format_time

#: Video frames per second: one flame frame per video frame.
FPS = int(FRAME_RATE_HZ)
#: Length of the silent card shown for a cue that may not be played, s.
CARD_S = 3.0
#: Default picture size, pixels.
DEFAULT_SIZE = (1280, 720)
#: Largest magnification offered.
MAX_MAGNIFY = 1000.0

BG = np.array([18, 18, 26], np.uint8)
TUBE = np.array([120, 120, 128], np.uint8)
TEXT = np.array([235, 235, 235], np.uint8)
DIM = np.array([150, 150, 160], np.uint8)
STILL = np.array([90, 90, 100], np.uint8)
AIR = np.array([60, 140, 255], np.uint8)
WARN = np.array([230, 40, 40], np.uint8)
FLAME_BASE = np.array([255, 150, 30], np.float32)
FLAME_TIP = np.array([255, 235, 120], np.float32)


# ---------------------------------------------------------------- text
@dataclass(frozen=True)
class Glyphs:
    """A monospace glyph atlas: ``masks[ch]`` is a (cell_h, cell_w) coverage array 0..1."""

    cell_w: int
    cell_h: int
    masks: dict


@lru_cache(maxsize=4)
def glyphs(em_px: int) -> Glyphs:
    """Printable ASCII rendered once with matplotlib (DejaVu Sans Mono) at ``em_px`` pixels."""
    plt = plotting()
    chars = [chr(c) for c in range(32, 127)]
    cell_h = int(math.ceil(1.25 * em_px))
    cell_w = int(math.ceil(0.62 * em_px)) + 1
    dpi = 100
    fig = plt.figure(figsize=(len(chars) * cell_w / dpi, cell_h / dpi), dpi=dpi)
    fig.patch.set_facecolor("black")
    baseline = 0.27
    for i, ch in enumerate(chars):
        fig.text((i + 0.5) / len(chars), baseline, ch, ha="center", va="baseline", color="white",
                 family="DejaVu Sans Mono", fontsize=em_px * 72.0 / dpi)
    fig.canvas.draw()
    rgba = np.asarray(fig.canvas.buffer_rgba())
    plt.close(fig)
    alpha = rgba[..., 0].astype(np.float32) / 255.0
    if alpha.shape[1] < len(chars) * cell_w:  # never narrower than asked; pad if rounding cut it
        alpha = np.pad(alpha, ((0, 0), (0, len(chars) * cell_w - alpha.shape[1])))
    masks = {ch: alpha[:cell_h, i * cell_w:(i + 1) * cell_w].copy() for i, ch in enumerate(chars)}
    return Glyphs(cell_w, cell_h, masks)


def put_text(img: np.ndarray, x: int, y: int, text: str, g: Glyphs, colour=TEXT) -> int:
    """Blend ``text`` into ``img`` with its top-left cell at (x, y); returns the x after it."""
    h, w = img.shape[:2]
    colour = np.asarray(colour, np.float32)
    for ch in text:
        if x + g.cell_w > w:
            break
        m = g.masks.get(ch, g.masks["?"])
        if ch != " " and 0 <= y and y + g.cell_h <= h:
            region = img[y:y + g.cell_h, x:x + g.cell_w].astype(np.float32)
            region += (colour - region) * m[..., None]
            img[y:y + g.cell_h, x:x + g.cell_w] = region.astype(np.uint8)
        x += g.cell_w
    return x


# ---------------------------------------------------------------- layout
@dataclass
class Layout:
    """Where things are drawn (pixels).  Rows grow downwards; flames grow up from ``base_y``."""

    width: int
    height: int
    hole_x: np.ndarray      # centre column of each hole
    half_width: int         # a flame is 2 * half_width + 1 columns wide
    base_y: int             # the first row below the flames (the top of the tube)
    top_y: int              # the highest row a flame may reach
    unit_px: float          # the still flame's height at true scale
    magnify: float
    tube_x0: int
    tube_x1: int
    big: int                # glyph sizes
    small: int

    def flame_px(self, height) -> np.ndarray:
        """Drawn flame heights, pixels (float; clipped to the picture)."""
        h = np.asarray(height, dtype=np.float64)
        px = self.unit_px * (1.0 + self.magnify * (h - 1.0))
        return np.clip(px, 0.0, self.base_y - self.top_y)

    def height_of_px(self, px) -> np.ndarray:
        """The relative flame height a drawn height in pixels stands for (inverse of :meth:`flame_px`)."""
        return 1.0 + (np.asarray(px, dtype=np.float64) / self.unit_px - 1.0) / self.magnify


def make_layout(positions_m, length_m: float, size=DEFAULT_SIZE, magnify: float = 1.0) -> Layout:
    width, height = int(size[0]), int(size[1])
    margin = int(0.04 * width)
    x0, x1 = margin, width - margin
    pos = np.asarray(positions_m, dtype=float)
    hole_x = np.round(x0 + (x1 - x0) * pos / length_m).astype(int)
    spacing = int(np.min(np.diff(hole_x))) if hole_x.size > 1 else width // 10
    half = max(0, min((spacing - 2) // 2, int(0.012 * width)))
    big = max(10, int(round(height / 24)))
    small = max(8, int(round(height / 40)))
    top_y = int(round(2.5 * big * 1.25)) + 4
    base_y = int(round(height * 0.72))
    unit = (base_y - top_y) / 2.2  # room up to 2.2 times the still flame
    return Layout(width, height, hole_x, half, base_y, top_y, unit, float(magnify), x0, x1, big, small)


# ---------------------------------------------------------------- the timeline
@dataclass
class Segment:
    """A stretch of the video: one cue (or the track), its flame frames and its words."""

    name: str
    label: str
    start_s: float
    duration_s: float
    height: np.ndarray | None   # (frames, holes); None: still flames (silence)
    air_in: np.ndarray | None
    lag: int = 0
    gain_db: float | None = None
    ceiling_db: float | None = None
    status: str = CueStatus.OK
    message: str = ""
    silent: bool = False  # an ok cue that plays nothing (a pause): no ceiling to show

    def frame(self, t_s: float, holes: int):
        """Heights and air per hole at ``t_s`` into the segment (still flames when silent)."""
        if self.height is None or self.height.shape[0] == 0:
            return np.ones(holes, np.float32), np.zeros(holes, np.float32)
        j = int(np.floor(t_s * FRAME_RATE_HZ + 1e-9)) + self.lag
        j = min(max(j, 0), self.height.shape[0] - 1)
        return self.height[j], self.air_in[j]


@dataclass
class Timeline:
    title: str
    rig_name: str
    positions_m: tuple
    length_m: float
    static_pa: float
    segments: list
    audio: np.ndarray           # mono float32, the whole show
    rate_hz: int
    notes: list = field(default_factory=list)

    @property
    def duration_s(self) -> float:
        return self.audio.size / self.rate_hz

    @property
    def frames(self) -> int:
        return int(round(self.duration_s * FPS))

    def at(self, t_s: float) -> Segment:
        starts = [s.start_s for s in self.segments]
        k = int(np.searchsorted(starts, t_s + 1e-9, side="right")) - 1
        return self.segments[max(0, min(k, len(self.segments) - 1))]


def sheet_timeline(sheet, static_pa: float | None = None, reserve: float | None = None,
                   progress=None, rig=None) -> Timeline:
    """Every cue rendered and verified as `showkit render` does, with its flame frames at that level.

    ``sheet``: a path or a sheet already read; ``rig``: its rig when already read (None: read
    here); today's ``static_pa`` (Pa) and ``reserve`` over it as
    :func:`showkit.show.lock.sheet_for_today` applies them (None keeps the rig's).
    """
    from showkit.analysis.pressure import frame_lag, signal_flames
    from showkit.show.lock import check_cue, sheet_for_today
    from showkit.show.playlist import RenderedCue
    from showkit.show.render import SHOW_RATE_HZ, render_cue
    from showkit.show.sources import SignalMemo

    sheet, rig = sheet_for_today(sheet, rig, static_pa, reserve)
    sheet_path = sheet.path or sheet.title
    if rig.geometry.hole_count == 0:
        raise InputError("the rig has no holes: there is no flame row to preview", str(sheet_path),
                         "add [holes] to the rig file")
    lag = frame_lag(rig)
    segments, parts, notes = [], [], []
    t = 0.0
    for k, cue in enumerate(sheet.cues):
        if progress:
            progress(k, len(sheet.cues), cue.id)
        signals = SignalMemo()  # the cue's sound built once for its check and its render
        check = check_cue(sheet, rig, cue, signals=signals)
        v = None
        if check.status == CueStatus.OK:
            try:
                v = render_cue(sheet, rig, cue, signals)
            except ShowkitError as exc:
                check = type(check)(cue.id, cue.gain_db, check.ceiling_db, check.headroom_db, CueStatus.ERROR,
                                    exc.line())
        if v is None:
            notes.append(f"cue {cue.id}: {check.status}: {check.message}")
            silent = RenderedCue(id=cue.id, label=cue.label,
                                 samples=np.zeros(int(round(CARD_S * SHOW_RATE_HZ)), np.float32),
                                 rate_hz=SHOW_RATE_HZ, then=cue.then, gain_db=cue.gain_db,
                                 ceiling_db=math.nan, status=CueStatus.OK, margin_pa=0.0,
                                 min_pressure_pa=rig.static_pa)
            segments.append(Segment(cue.id, cue.label, t, CARD_S, None, None, 0, cue.gain_db,
                                    check.ceiling_db, check.status, check.message))
            parts.append(silent)
            t += CARD_S
            continue
        frames = signal_flames(rig, v.samples, v.rate_hz, 0.0)
        d = v.samples.size / v.rate_hz
        segments.append(Segment(cue.id, cue.label, t, d, frames.height, frames.air_in, lag, v.gain_db,
                                v.ceiling_db, CueStatus.OK, "", v.silent))
        parts.append(v)
        t += d
    if progress:
        progress(len(sheet.cues), len(sheet.cues), None)
    if not parts:
        raise InputError("the sheet has no cues", str(sheet_path), "add cues before making a preview")
    audio = _show_audio(rig, parts, SHOW_RATE_HZ)
    g = rig.geometry
    return Timeline(sheet.title, rig.name, g.hole_positions_m, g.length_m, rig.static_pa, segments, audio,
                    SHOW_RATE_HZ, notes)


def _show_audio(rig, parts, rate_hz: int) -> np.ndarray:
    """The cues in order, as `showkit render` writes the show (resampled cues verified again)."""
    import soundfile as sf

    from showkit.show.render import write_show

    with tempfile.TemporaryDirectory(prefix="showkit-preview-") as folder:
        path = Path(folder) / "show.wav"
        write_show(rig, parts, path)
        audio, rate = sf.read(str(path), dtype="float32")
    if rate != rate_hz:  # pragma: no cover - write_show writes at SHOW_RATE_HZ
        raise ValueError("unexpected rate")
    return audio


def track_timeline(rig, path, start_s: float | None = None, end_s: float | None = None,
                   gain_db: float | None = None) -> Timeline:
    """A track (or passage) at ``gain_db`` (default: its ceiling); refused above the ceiling."""
    from showkit.analysis.audio import load_audio
    from showkit.analysis.pressure import frame_lag, passage_flames, passage_report

    if rig.geometry.hole_count == 0:
        raise InputError("the rig has no holes: there is no flame row to preview", rig.name,
                         "add [holes] to the rig file")
    report = passage_report(rig, path, start_s, end_s, flames=False)
    ceiling = report.ceiling_db
    gain = ceiling if gain_db is None else float(gain_db)
    if not math.isfinite(gain):
        raise InputError(f"the gain {gain_db!r} is not a finite number of dB", "--gain", "give e.g. --gain -12")
    if gain > ceiling + 1e-9:
        raise InputError(f"--gain {gain:+.2f} dB is above this passage's ceiling {ceiling:+.2f} dB", "--gain",
                         f"give {ceiling:+.2f} dB or lower (or leave --gain out to play at the ceiling)")
    frames = passage_flames(rig, path, start_s, end_s, gain)
    audio = load_audio(path, None, start_s, end_s)
    samples = (audio.samples * 10.0 ** (gain / 20.0)).astype(np.float32)
    peak = float(np.max(np.abs(samples))) if samples.size else 0.0
    if peak > 1.0 + 1e-5:  # the ceiling includes the full-scale cap: this would be a bug
        raise InputError(f"the track would peak at {20 * math.log10(peak):+.2f} dBFS", str(path),
                         "lower --gain")
    g = rig.geometry
    name = Path(path).name
    seg = Segment(name, "track preview", 0.0, samples.size / audio.rate_hz, frames.height, frames.air_in,
                  frame_lag(rig), gain, ceiling, CueStatus.OK, "")
    offset = audio.start_s
    tl = Timeline(f"{name} from {offset:.1f} s", rig.name, g.hole_positions_m, g.length_m, rig.static_pa,
                  [seg], samples, int(audio.rate_hz))
    return tl


# ---------------------------------------------------------------- drawing
class Painter:
    """Draws the frames of one timeline at one layout (backgrounds made once per segment)."""

    def __init__(self, tl: Timeline, layout: Layout):
        self.tl, self.L = tl, layout
        L = layout
        self.gb, self.gs = glyphs(L.big), glyphs(L.small)
        rows = L.base_y - L.top_y
        self.rows = rows
        # flame colours by height above the base: tip colour at the top of a still flame
        frac = np.clip(np.arange(rows)[::-1][:, None] / max(L.unit_px, 1.0), 0.0, 1.0)  # row -> height fraction
        grad = FLAME_BASE[None, :] + (FLAME_TIP - FLAME_BASE)[None, :] * frac
        self.grad = np.broadcast_to(grad[:, None, :].astype(np.uint8), (rows, L.width, 3))
        self.air_img = np.broadcast_to(AIR, (rows, L.width, 3))
        # each hole's columns and the flame's rounded top (the centre column is exact)
        span = np.arange(-L.half_width, L.half_width + 1)
        self.cols = (L.hole_x[:, None] + span[None, :]).clip(0, L.width - 1)
        self.profile = np.sqrt(np.clip(1.0 - (span / (L.half_width + 1.0)) ** 2, 0.0, 1.0))
        self.row_height = (L.base_y - np.arange(L.top_y, L.base_y))[:, None] - 0.5  # pixel-centre height
        self.clock_cells = len(f"show {_clock(tl.duration_s)} / {_clock(tl.duration_s)}  cue 0:00.0 / 0:00.0") + 2
        self.base = self._base()
        self._backgrounds: dict = {}

    def _base(self) -> np.ndarray:
        L, tl = self.L, self.tl
        img = np.empty((L.height, L.width, 3), np.uint8)
        img[:] = BG
        # the still flame's height: a dotted line between the holes (never over a flame column)
        y = int(round(L.base_y - L.flame_px(1.0)))
        if L.top_y <= y < L.base_y:
            line = np.zeros(L.width, bool)
            line[L.tube_x0:L.tube_x1:3] = True
            line[self.cols.ravel()] = False
            img[y, line] = STILL
        # the tube and its holes
        tube_h = max(6, int(0.035 * L.height))
        img[L.base_y + 2:L.base_y + 2 + tube_h, L.tube_x0:L.tube_x1] = TUBE
        img[L.base_y + 2, L.hole_x] = BG
        # scale words, fixed for the whole video
        if L.magnify == 1.0:
            scale = "TRUE SCALE: flame heights as the model predicts them"
        else:
            scale = (f"MAGNIFIED x{L.magnify:g}: differences from the still flame drawn "
                     f"{L.magnify:g} times taller than they are")
        y0 = L.base_y + 2 + tube_h + int(0.9 * self.gs.cell_h)
        put_text(img, L.tube_x0, y0, scale, self.gs, TEXT if L.magnify == 1.0 else WARN)
        put_text(img, L.tube_x0, y0 + self.gs.cell_h,
                 "dotted line: the still flame; blue: air drawn in; speaker end on the left", self.gs, DIM)
        put_text(img, L.tube_x0, y0 + 2 * self.gs.cell_h,
                 f"{tl.rig_name}, static {tl.static_pa:.2f} Pa", self.gs, DIM)
        put_text(img, L.tube_x0, L.height - self.gs.cell_h - 2,
                 "Model prediction, not a safety device: follow local codes and licensed practice.",
                 self.gs, DIM)
        return img

    def background(self, seg: Segment) -> np.ndarray:
        key = id(seg)
        if key not in self._backgrounds:
            img = self.base.copy()
            L = self.L
            head = seg.name + (f"  {seg.label}" if seg.label else "")
            room = (L.width - 2 * L.tube_x0 - self.clock_cells * self.gs.cell_w) // self.gb.cell_w - 1
            put_text(img, L.tube_x0, 4, head[:max(room, 8)], self.gb, TEXT)
            if seg.status == CueStatus.OK:
                words = (SILENT_MESSAGE if seg.silent else
                         f"gain {seg.gain_db:+.2f} dB, ceiling {seg.ceiling_db:+.2f} dB"
                         if seg.gain_db is not None and seg.ceiling_db is not None else "")
                put_text(img, L.tube_x0, 4 + self.gb.cell_h, words, self.gs, DIM)
            else:
                import textwrap

                cells = max(20, (L.tube_x1 - L.tube_x0) // self.gs.cell_w)
                words = textwrap.wrap(f"{seg.status.upper()} - NOT PLAYED: {seg.message}", cells)
                for i, line in enumerate(words[:5]):
                    put_text(img, L.tube_x0, 4 + self.gb.cell_h + i * self.gs.cell_h, line, self.gs, WARN)
            self._backgrounds = {key: img}  # one segment at a time: frames go in order
        return self._backgrounds[key]

    def draw(self, k: int, out: np.ndarray | None = None) -> np.ndarray:
        """Frame ``k`` (time ``k / FPS``) as an (height, width, 3) uint8 array."""
        L, tl = self.L, self.tl
        t = k / FPS
        seg = tl.at(t)
        local = t - seg.start_s
        height, air = seg.frame(local, L.hole_x.size)
        img = out if out is not None else np.empty((L.height, L.width, 3), np.uint8)
        np.copyto(img, self.background(seg))
        colh = np.zeros(L.width)
        colh[self.cols] = L.flame_px(height)[:, None] * self.profile[None, :]
        # only the rows a flame reaches this frame (about half the area at true scale)
        first = max(0, self.rows - int(math.ceil(float(colh.max()))) - 1)
        region = img[L.top_y + first:L.base_y]
        mask = self.row_height[first:] < colh[None, :]
        np.copyto(region, self.grad[first:], where=mask[..., None])
        drawn_in = air > 0
        if drawn_in.any():
            acol = np.zeros(L.width, bool)
            acol[self.cols[drawn_in]] = True
            np.copyto(region, self.air_img[first:], where=(mask & acol[None, :])[..., None])
            # a mark under the tube at every hole drawing in air
            tube_h = max(6, int(0.035 * L.height))
            img[L.base_y + 2:L.base_y + 2 + tube_h, acol] = AIR
            put_text(img, L.tube_x1 - 30 * self.gs.cell_w, 4 + self.gb.cell_h,
                     f"AIR DRAWN IN at {format_count(int(drawn_in.sum()), 'hole')}", self.gs, AIR)
        clock = f"show {_clock(t)} / {_clock(tl.duration_s)}  cue {_clock(local)} / {_clock(seg.duration_s)}"
        put_text(img, L.tube_x1 - len(clock) * self.gs.cell_w, 4, clock, self.gs, TEXT)
        return img


def _clock(seconds: float) -> str:
    """The video's running clock, m:ss.s cut to the tenth (never below zero)."""
    return format_time(max(0.0, seconds), round_down=True)


# ---------------------------------------------------------------- writing
def check_options(size, magnify: float) -> tuple[int, int]:
    w, h = (int(size[0]), int(size[1]))
    if w < 320 or h < 180 or w > 3840 or h > 2160 or w % 2 or h % 2:
        raise InputError(f"cannot draw a {w}x{h} video", "--size", "give an even width and height, "
                         "from 320x180 to 3840x2160, e.g. 1280x720")
    if not (math.isfinite(magnify) and 1.0 <= magnify <= MAX_MAGNIFY):
        raise InputError(f"--magnify {magnify:g} is out of range", "--magnify",
                         f"give 1 (true scale) up to {MAX_MAGNIFY:g}")
    return w, h


def check_output(out) -> Path:
    """The video's path, if its folder exists and its ending names a container ffmpeg writes."""
    out = Path(out)
    folder = out.parent if str(out.parent) else Path(".")
    if not folder.is_dir():
        raise InputError("no such folder", str(folder), "create the folder first or give another path")
    if out.suffix.lower() not in (".mp4", ".m4v", ".mov"):
        raise InputError(f"cannot write a video as {out.suffix or 'a file without an ending'}", str(out),
                         "name the file .mp4")
    return out


def write_video(tl: Timeline, out, size=DEFAULT_SIZE, magnify: float = 1.0, progress=None,
                crf: int = 23, preset: str = "superfast") -> dict:
    """Draw every frame and encode them with the sound; returns facts about the file."""
    import imageio_ffmpeg

    from showkit.show.render import write_wav

    w, h = check_options(size, magnify)
    out = check_output(out)
    layout = make_layout(tl.positions_m, tl.length_m, (w, h), magnify)
    painter = Painter(tl, layout)
    n = tl.frames
    buf = np.empty((h, w, 3), np.uint8)
    with tempfile.TemporaryDirectory(prefix="showkit-preview-") as scratch:
        wav = Path(scratch) / "sound.wav"
        write_wav(wav, tl.audio, tl.rate_hz, subtype="FLOAT")
        try:
            with replacing(out, backups=1, suffix=out.suffix) as tmp:
                writer = imageio_ffmpeg.write_frames(
                    str(tmp), (w, h), fps=FPS, codec="libx264", macro_block_size=2, quality=None,
                    audio_path=str(wav), audio_codec="aac", ffmpeg_log_level="error",
                    output_params=["-preset", preset, "-crf", str(int(crf)), "-b:a", "160k",
                                   "-movflags", "+faststart"])
                writer.send(None)
                try:
                    for k in range(n):
                        writer.send(painter.draw(k, buf))
                        if progress and k % FPS == 0:
                            progress(k, n, None)
                finally:
                    writer.close()
        except (OSError, RuntimeError) as exc:
            raise InputError(f"cannot write the video ({exc})".splitlines()[0][:200], str(out),
                             "check the folder is writable and has room") from None
    if progress:
        progress(n, n, None)
    return {"path": out, "frames": n, "fps": FPS, "duration_s": n / FPS, "audio_s": tl.duration_s,
            "size": (w, h), "magnify": magnify, "layout": layout, "notes": tl.notes}
