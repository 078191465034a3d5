"""Rendering a locked sheet to audio, every cue verified against the pressure model.

A cue is rendered only when its lock is valid and its gain is at or below
today's ceiling.  The rendered samples are then run through the tube model
again (:func:`showkit.analysis.pressure.signal_report` at unit gain): the
pressure at every hole must stay at or above the reserve line and the peak at
or below full scale, or the cue is refused.  Nothing is assumed.
"""

from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from showkit.errors import SheetError
from showkit.rigfile import Rig
from showkit.show.lock import check_cue, sheet_rig
from showkit.show.sheet import Cue, Sheet
from showkit.show.sources import TONE_RATE_HZ, cue_signal

#: Relative slack allowed in verification for float32 rounding of the samples.
VERIFY_TOLERANCE = 1e-5
#: Rate of a whole-show render, Hz (every cue is resampled to it).
SHOW_RATE_HZ = TONE_RATE_HZ


@dataclass(frozen=True)
class VerifiedCue:
    """A cue's samples at its gain and fades, verified.

    ``margin_pa``: the lowest pressure above ambient at any hole minus the
    reserve line (>= 0), Pa; ``gain_db``/``ceiling_db`` for today's conditions.
    """

    id: str
    label: str
    samples: np.ndarray
    rate_hz: int
    gain_db: float
    ceiling_db: float
    margin_pa: float
    min_pressure_pa: float
    then: str
    ride: bool = False


def verify(rig: Rig, samples: np.ndarray, rate_hz: int, where: str) -> tuple[float, float]:
    """Re-simulate rendered samples; refuse them if any hole dips below the reserve line.

    Returns ``(margin_pa, min_pressure_pa)``.
    """
    from showkit.analysis.pressure import signal_report

    peak = float(np.max(np.abs(samples))) if samples.size else 0.0
    if peak > 1.0 + VERIFY_TOLERANCE:
        raise SheetError(f"the rendered cue peaks at {20 * math.log10(peak):+.2f} dBFS, above full scale",
                         where, "lower the gain; the cue was not rendered")
    if peak == 0.0:
        return (1.0 - rig.reserve) * rig.static_pa, rig.static_pa
    report = signal_report(rig, samples, rate_hz, flames=False)
    lowest = rig.static_pa - report.swing_pa
    line = rig.reserve * rig.static_pa
    slack = VERIFY_TOLERANCE * rig.static_pa
    if lowest < line - slack:
        raise SheetError(f"the rendered cue would take hole {report.worst_hole + 1} down to "
                         f"{lowest:.2f} Pa, below the safe line {line:.2f} Pa, at {report.worst_time_s:.2f} s",
                         where, "lower the gain and lock again; the cue was not rendered")
    # within the slack is on the line (float32 rounding), not below it
    return max(lowest - line, 0.0), max(lowest, line)


def render_cue(sheet: Sheet, rig: Rig, cue: Cue) -> VerifiedCue:
    """Render and verify one cue for the rig's (today's) static pressure and reserve.

    Raises a :class:`SheetError` naming the cue if it is stale, over its
    ceiling, or fails verification.
    """
    where = f"{sheet.path or 'sheet'}: cue {cue.id}"
    signal = cue_signal(sheet, rig, cue)
    state = check_cue(sheet, rig, cue, signal=signal)
    if state.status != "ok":
        raise SheetError(f"cue is {state.status}: {state.message}", where,
                         "fix it before rendering (nothing was rendered for this cue)")
    samples = signal.samples * 10.0 ** (cue.gain_db / 20.0)
    if cue.ride:
        from showkit.show.rider import ride

        samples = ride(rig, samples, signal.rate_hz)
    samples = samples.astype(np.float32)
    margin, lowest = verify(rig, samples.astype(float), signal.rate_hz, where)
    return VerifiedCue(id=cue.id, label=cue.label, samples=samples, rate_hz=signal.rate_hz,
                       gain_db=cue.gain_db, ceiling_db=state.ceiling_db, margin_pa=margin,
                       min_pressure_pa=lowest, then=cue.then, ride=cue.ride)


def render_sheet(sheet: Sheet, rig: Rig | None = None, progress=None) -> list[VerifiedCue]:
    """Render and verify every cue in show order (stops at the first refusal)."""
    rig = rig or sheet_rig(sheet)
    out = []
    for k, cue in enumerate(sheet.cues):
        if progress:
            progress(k, len(sheet.cues), cue.id)
        out.append(render_cue(sheet, rig, cue))
    if progress:
        progress(len(sheet.cues), len(sheet.cues), None)
    return out


def _resampled(cue: VerifiedCue, rate_hz: int) -> np.ndarray:
    if cue.rate_hz == rate_hz:
        return cue.samples
    import soxr

    y = soxr.resample(cue.samples.astype(np.float64), cue.rate_hz, rate_hz, quality="VHQ")
    # resampling can raise inter-sample peaks; never let it pass full scale
    return np.clip(y, -1.0, 1.0).astype(np.float32)


def write_wav(path: Path, samples: np.ndarray, rate_hz: int, subtype: str = "FLOAT", protect=()) -> None:
    """Write mono samples as WAV (``FLOAT`` 32-bit or ``PCM_24``) with the safe writer."""
    from showkit.safesave import write_audio

    _check_rate(rate_hz, str(path))
    write_audio(path, samples, rate_hz, subtype, protect=protect, what="rendered audio")


def _check_rate(rate_hz: int, where: str) -> None:
    from showkit.limits import MAX_RATE_HZ

    if not 0 < rate_hz <= MAX_RATE_HZ:
        raise SheetError(f"a render at {rate_hz} Hz is above showkit's limit ({MAX_RATE_HZ} Hz)", where,
                         "resample the source audio to 48 or 96 kHz")


@dataclass(frozen=True)
class RenderedSummary:
    """What was rendered of a cue once its samples are written (for the summary table)."""

    id: str
    gain_db: float
    ceiling_db: float
    min_pressure_pa: float
    margin_pa: float
    duration_s: float


def _summary(v: VerifiedCue) -> RenderedSummary:
    return RenderedSummary(v.id, v.gain_db, v.ceiling_db, v.min_pressure_pa, v.margin_pa,
                           v.samples.size / v.rate_hz)


def write_show(rig: Rig, cues, path: Path, subtype: str = "FLOAT", gap_s: float = 0.0,
               protect=()) -> list[RenderedSummary]:
    """All cues, in order, in one WAV at :data:`SHOW_RATE_HZ`, written cue by cue.

    ``cues`` is an iterable of :class:`VerifiedCue` (e.g. a generator rendering
    them one at a time, so that only one cue is in memory).  Cues at another
    rate are resampled (and clipped to full scale), and the resampled samples
    are verified against the pressure model again.  The file appears only when
    every cue is written (the safe writer); a refusal leaves no file.
    """
    from showkit.safesave import audio_writer

    gap = np.zeros(int(round(gap_s * SHOW_RATE_HZ)), dtype=np.float32)
    done = []
    with audio_writer(path, SHOW_RATE_HZ, 1, subtype, protect=protect, what="rendered show") as f:
        for cue in cues:
            part = _resampled(cue, SHOW_RATE_HZ)
            if cue.rate_hz != SHOW_RATE_HZ:
                verify(rig, part.astype(float), SHOW_RATE_HZ, f"cue {cue.id} (resampled)")
            f.write(part)
            if gap.size:
                f.write(gap)
            done.append(_summary(cue))
            del part
    return done


def _cue_file_name(k: int, cue_id: str) -> str:
    safe = "".join(ch if ch.isalnum() or ch in "-_" else "_" for ch in cue_id)
    return f"{k:02d}-{safe}.wav"


def write_per_cue(cues, folder: Path, subtype: str = "FLOAT", protect=()) -> tuple[list[Path], list]:
    """One WAV per cue at its own rate: ``NN-id.wav`` in show order; the paths and summaries.

    ``folder`` must be a folder (made if missing, its parent must exist).  Every
    file is written to a temporary file first; they are all renamed into place
    only once every cue has been rendered and verified.
    """
    from showkit.errors import OutputError
    from showkit.safesave import audio_writer

    folder = Path(folder)
    if folder.exists() and not folder.is_dir():
        raise OutputError("is a file; --per-cue needs a folder", str(folder),
                          "give a folder name (it is made if missing)")
    if not folder.exists():
        parent = folder.parent if str(folder.parent) else Path(".")
        if not parent.is_dir():
            raise OutputError(f"the folder {parent} does not exist", str(folder),
                              "give a folder inside an existing one")
        try:
            folder.mkdir()
        except OSError as exc:
            raise OutputError(f"cannot make the folder ({exc.strerror})", str(folder),
                              "give a folder you may write") from None
    paths, summaries = [], []
    with contextlib.ExitStack() as stack:
        for k, cue in enumerate(cues, 1):
            _check_rate(cue.rate_hz, f"cue {cue.id}")
            p = folder / _cue_file_name(k, cue.id)
            f = stack.enter_context(audio_writer(p, cue.rate_hz, 1, subtype, protect=protect,
                                                 what="rendered cue"))
            f.write(cue.samples)
            f.close()
            paths.append(p)
            summaries.append(_summary(cue))
    return paths, summaries


def render_iter(sheet: Sheet, rig: Rig, progress=None):
    """Render and verify the cues one at a time, in show order (a generator)."""
    for k, cue in enumerate(sheet.cues):
        if progress:
            progress(k, len(sheet.cues), cue.id)
        yield render_cue(sheet, rig, cue)
    if progress:
        progress(len(sheet.cues), len(sheet.cues), None)


def render_for_playback(sheet_path, static_pa: float | None = None,
                        temperature_k: float | None = None):
    """The pre-show check and render for the live engine.

    Today's static pressure re-derives every ceiling by exact scaling.  Today's
    gas temperature moves the modes: every cue is then locked again in memory
    for the warmer or cooler gas (tone and glide cues on modes follow the modes;
    the file is not changed) and checked against its gain.

    Returns
    -------
    cues : list of :class:`showkit.show.playlist.RenderedCue`
        In show order; cues that may not be played carry their status and why.
    problems : list of str
        One line per cue that does not fit or could not be rendered, and what
        the pre-show check used.
    """
    from showkit.errors import ShowkitError
    from showkit.limits import MAX_SHOW_SAMPLES
    from showkit.show.lock import lock_cue
    from showkit.show.playlist import RenderedCue
    from showkit.show.sheet import load_sheet

    sheet = load_sheet(sheet_path)
    rig = sheet_rig(sheet)
    today = rig.with_conditions(static_pa=static_pa, temperature_k=temperature_k)
    problems = [f"pre-show check: static {today.static_pa:g} Pa, gas {today.temperature_k - 273.15:.1f} C, "
                f"reserve {today.reserve:g}"]
    relock = temperature_k is not None and abs(temperature_k - rig.temperature_k) > 1e-9
    out = []
    held = 0  # samples held for the live run, all cues together
    for cue in sheet.cues:
        if held > MAX_SHOW_SAMPLES:
            msg = (f"the show before this cue already holds {held / 48000 / 60:.0f} min of audio, "
                   f"the most a live run keeps in memory ({MAX_SHOW_SAMPLES / 48000 / 60:.0f} min at 48 kHz); "
                   "split the show into two sheets")
            problems.append(f"cue {cue.id}: error: {msg}")
            out.append(RenderedCue(cue.id, cue.label, np.zeros(0, np.float32), 48000, cue.then,
                                   cue.gain_db, None, "error", msg))
            continue
        try:
            if relock:
                original = cue.gain_db
                cue, _ = lock_cue(sheet, today, cue)
                if cue.gain_db < original:
                    # the gain no longer fits at this temperature: do not clamp silently
                    cue = replace(cue, gain_db=original)
            state = check_cue(sheet, today, cue)
            if state.status != "ok":
                problems.append(f"cue {cue.id}: {state.status}: {state.message}")
                out.append(RenderedCue(cue.id, cue.label, np.zeros(0, np.float32), 48000, cue.then,
                                       cue.gain_db, state.ceiling_db, state.status, state.message))
                continue
            v = render_cue(sheet, today, cue)
            held += v.samples.size * max(1.0, v.rate_hz / 48000)
            out.append(RenderedCue(v.id, v.label, v.samples, v.rate_hz, v.then, v.gain_db,
                                   v.ceiling_db, "ok", ""))
        except ShowkitError as exc:
            problems.append(f"cue {cue.id}: error: {exc.line()}")
            out.append(RenderedCue(cue.id, cue.label, np.zeros(0, np.float32), 48000, cue.then,
                                   cue.gain_db, None, "error", exc.line()))
    return out, problems
