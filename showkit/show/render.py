"""Rendering a locked sheet to audio, every cue verified against the pressure model.

A cue is rendered only when its lock is valid and its gain is at or below
today's ceiling.  The rendered samples are then run through the tube model
again (:func:`showkit.analysis.pressure.signal_report` at unit gain): the
pressure at every hole must stay at or above the reserve line and the peak at
or below full scale, or the cue is refused.  Nothing is assumed.

A rendered cue is a :class:`showkit.show.playlist.RenderedCue`, the type the
engine plays: it carries what the verification found and ``verify_at``, so that
a cue played (or written) at another rate is verified again at that rate.
"""

from __future__ import annotations

import contextlib
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from showkit.errors import OutputError, SheetError, ShowkitError
from showkit.limits import MAX_RATE_HZ, MAX_SHOW_SAMPLES
from showkit.rigfile import Rig
from showkit.show.lock import check_cue, sheet_rig
from showkit.show.playlist import RenderedCue
from showkit.show.sheet import Cue, Sheet
from showkit.show.sources import TONE_RATE_HZ, SignalMemo, signal_for
from showkit.show.status import CueStatus

#: Relative slack allowed in verification for float32 rounding of the samples.
VERIFY_TOLERANCE = 1e-5
#: Rate of a whole-show render, Hz (every cue is resampled to it).
SHOW_RATE_HZ = TONE_RATE_HZ


def verify(rig: Rig, samples: np.ndarray, rate_hz: int, where: str,
           flames: bool = False) -> tuple[float, float, tuple | None]:
    """Re-simulate rendered samples; refuse them if any hole dips below the reserve line.

    Returns ``(margin_pa, min_pressure_pa, flame_row)``: with ``flames`` also the
    predicted flame row of the samples as they play (:func:`flame_row` of
    :func:`showkit.analysis.pressure.signal_flames` at 0 dB, as the show book and the
    preview draw them; one more pass on the best estimate, about an eighth more work;
    silence is the still row), else ``flame_row`` is None.  The row gates nothing.
    """
    from showkit.analysis.pressure import frame_lag, signal_flames, signal_report

    peak = float(np.max(np.abs(samples))) if samples.size else 0.0
    if peak > 1.0 + VERIFY_TOLERANCE:
        raise SheetError(f"the rendered cue peaks at {20 * math.log10(peak):+.2f} dBFS, above full scale",
                         where, "lower the gain; the cue was not rendered")
    if peak == 0.0:
        still = None
        if flames:  # no sound moves no flame: every hole at its still height (1) for the cue's length
            from showkit.physics.flames import FRAME_RATE_HZ

            frames = max(1, math.ceil(samples.size / rate_hz * FRAME_RATE_HZ))
            still = (np.ones((frames, len(rig.geometry.hole_positions_m)), np.float32), float(FRAME_RATE_HZ),
                     1.0, 1.0)
        return (1.0 - rig.reserve) * rig.static_pa, rig.static_pa, still
    report = signal_report(rig, samples, rate_hz, flames=False)
    lowest = rig.static_pa - report.swing_pa
    line = rig.reserve * rig.static_pa
    slack = VERIFY_TOLERANCE * rig.static_pa
    if lowest < line - slack:
        raise SheetError(f"the rendered cue would take hole {report.worst_hole + 1} down to "
                         f"{lowest:.2f} Pa, below the safe line {line:.2f} Pa, at {report.worst_time_s:.2f} s",
                         where, "lower the gain and lock again; the cue was not rendered")
    # within the slack is on the line (float32 rounding), not below it
    row = flame_row(signal_flames(rig, samples, rate_hz, 0.0), frame_lag(rig)) if flames else None
    return max(lowest - line, 0.0), max(lowest, line), row


def flame_row(frames, lag_frames: int = 0) -> tuple:
    """Flame frames (:class:`~showkit.physics.response.PressureFrames`) as the Run view draws
    them: ``(height frames, frame rate Hz, lowest height, highest height)``.

    ``lag_frames``: the hole responses' delay in frames
    (:func:`showkit.analysis.pressure.frame_lag`); the first ``lag_frames`` frames are
    dropped, so that row ``k`` is the flames at the drive's frame ``k`` (the play position),
    as the preview and the show book read them.
    """
    h = np.asarray(frames.height)
    lag = max(0, int(lag_frames))
    if 0 < lag < h.shape[0]:
        h = h[lag:]
    return (h, float(frames.frame_rate_hz),
            float(h.min()) if h.size else 0.0, float(h.max()) if h.size else 1.0)


def render_cue(sheet: Sheet, rig: Rig, cue: Cue, signals: SignalMemo | None = None,
               flames: bool = False) -> RenderedCue:
    """Render and verify one cue for the rig's (today's) static pressure and reserve.

    Raises a :class:`SheetError` naming the cue if it is stale, over its
    ceiling, or fails verification.  The result's ``verify_at`` checks its samples
    again on this rig at another rate (:func:`played_rate_check`).  ``signals``: the
    pass's :class:`~showkit.show.sources.SignalMemo` (the cue's sound, if the pass's
    check built it already); None builds it here.  ``flames``: the verification also
    predicts the cue's flame row (:attr:`RenderedCue.flames`), for the Run view.
    """
    where = f"{sheet.path or 'sheet'}: cue {cue.id}"
    signal = signal_for(sheet, rig, cue, signals)
    state = check_cue(sheet, rig, cue, signal=signal)
    if state.status is not CueStatus.OK:
        raise SheetError(f"cue is {state.status}: {state.message}", where,
                         "fix it before rendering (nothing was rendered for this cue)")
    samples = signal.samples * 10.0 ** (cue.gain_db / 20.0)
    if cue.ride:
        from showkit.show.rider import ride

        samples = ride(rig, samples, signal.rate_hz)
    samples = samples.astype(np.float32)
    margin, lowest, row = verify(rig, samples.astype(float), signal.rate_hz, where, flames=flames)
    return RenderedCue(id=cue.id, label=cue.label, samples=samples, rate_hz=signal.rate_hz, then=cue.then,
                       gain_db=cue.gain_db, ceiling_db=state.ceiling_db, status=CueStatus.OK,
                       verify_at=played_rate_check(rig), margin_pa=margin, min_pressure_pa=lowest,
                       ride=cue.ride, plays_nothing=state.plays_nothing, flames=row)


def render_sheet(sheet: Sheet, rig: Rig | None = None, progress=None) -> list[RenderedCue]:
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


def _resampled(cue: RenderedCue, rate_hz: int) -> np.ndarray:
    """The playback resampler (:func:`showkit.show.playlist.resample_samples`): the same
    samples the live engine plays at that rate, and that the lock checked at the show rate."""
    from showkit.show.playlist import resample_samples

    if cue.rate_hz == rate_hz:
        return cue.samples
    return resample_samples(cue.samples, cue.rate_hz, rate_hz)


def played_rate_check(rig: Rig):
    """``check(samples, rate_hz) -> dB``: the ceiling of exactly these samples on ``rig``.

    Handed to each rendered cue (:attr:`RenderedCue.verify_at`) so that a cue
    resampled for the device is verified at the rate that is played.
    """
    from showkit.analysis.pressure import signal_report

    def check(samples: np.ndarray, rate_hz: int) -> float:
        x = np.asarray(samples, dtype=float)
        if not x.any():
            return math.inf
        return signal_report(rig, x, int(rate_hz), flames=False).ceiling_db

    return check


def check_samples(samples: np.ndarray, where: str) -> None:
    """Every sample finite and within full scale (1.0), or a SheetError naming ``where``."""
    x = np.asarray(samples)
    if x.size and not np.all(np.isfinite(x)):
        raise SheetError("the samples hold NaN or infinite values", where, "nothing was written; report this")
    peak = float(np.max(np.abs(x))) if x.size else 0.0
    if peak > 1.0 + VERIFY_TOLERANCE:
        raise SheetError(f"the samples peak at {20 * math.log10(peak):+.2f} dBFS, above full scale", where,
                         "nothing was written; lower the level")


def write_wav(path: Path, samples: np.ndarray, rate_hz: int, subtype: str = "FLOAT", protect=()) -> None:
    """Write mono samples as WAV (``FLOAT`` 32-bit or ``PCM_24``) with the safe writer.

    Refuses (SheetError) samples that are not finite or that pass full scale:
    nothing unchecked is ever written.
    """
    from showkit.safesave import write_audio

    check_samples(samples, str(path))
    _check_rate(rate_hz, str(path))
    write_audio(path, samples, rate_hz, subtype, protect=protect, what="rendered audio")


def _check_rate(rate_hz: int, where: str) -> None:
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
    silent: bool = False


def _summary(v: RenderedCue) -> RenderedSummary:
    return RenderedSummary(v.id, v.gain_db, v.ceiling_db, v.min_pressure_pa, v.margin_pa,
                           v.samples.size / v.rate_hz, v.silent)


def write_show(rig: Rig, cues, path: Path, subtype: str = "FLOAT", gap_s: float = 0.0,
               protect=()) -> list[RenderedSummary]:
    """All cues, in order, in one WAV at :data:`SHOW_RATE_HZ`, written cue by cue.

    ``cues`` is an iterable of rendered cues (:class:`RenderedCue`, e.g. a generator rendering
    them one at a time, so that only one cue is in memory).  Cues at another
    rate are resampled (and clipped to full scale), and the resampled samples
    are verified against the pressure model again.  The file appears only when
    every cue is written (the safe writer); a refusal leaves no file.  A file it replaces
    is kept as ``NAME.bak``.
    """
    from showkit.safesave import audio_writer

    gap = np.zeros(int(round(gap_s * SHOW_RATE_HZ)), dtype=np.float32)
    done = []
    # a render the user names keeps the file it replaces as NAME.bak (the project's save rule)
    with audio_writer(path, SHOW_RATE_HZ, 1, subtype, protect=protect, what="rendered show", backups=1) as f:
        for cue in cues:
            part = _resampled(cue, SHOW_RATE_HZ)
            if cue.rate_hz != SHOW_RATE_HZ:
                verify(rig, part.astype(float), SHOW_RATE_HZ, f"cue {cue.id} (resampled)")
            check_samples(part, f"cue {cue.id}")
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
    only once every cue has been rendered and verified; a file replaced is kept as ``NAME.bak``.
    """
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
            check_samples(cue.samples, f"cue {cue.id}")
            f = stack.enter_context(audio_writer(p, cue.rate_hz, 1, subtype, protect=protect,
                                                 what="rendered cue", backups=1))
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
                        temperature_k: float | None = None, flames: bool = False):
    """The pre-show check and render for the live engine.

    Today's static pressure re-derives every ceiling by exact scaling.  Today's
    gas temperature moves the modes: every valid cue is then locked again in
    memory for the warmer or cooler gas (tone and glide cues on modes follow the
    modes; the file is not changed) and checked against its gain; a stale cue
    stays stale (:func:`showkit.show.preshow.cue_for_today`).  ``flames``: each cue's
    verification also predicts its flame row (:func:`render_cue`).

    Returns
    -------
    cues : list of :class:`showkit.show.playlist.RenderedCue`
        In show order; cues that may not be played carry their status and why.
    problems : list of str
        One line per cue that does not fit or could not be rendered, and what
        the pre-show check used.
    """
    from showkit.show.preshow import cue_for_today
    from showkit.show.sheet import load_sheet

    sheet = load_sheet(sheet_path)
    rig = sheet_rig(sheet)
    today = rig.with_conditions(static_pa=static_pa, temperature_k=temperature_k)
    problems = [f"pre-show check: static {today.static_pa:.2f} Pa, gas {today.temperature_k - 273.15:.1f} C, "
                f"reserve {today.reserve:g}"]
    out = []
    held = 0  # samples held for the live run, all cues together
    for cue in sheet.cues:
        if held > MAX_SHOW_SAMPLES:
            msg = (f"the show before this cue already holds {held / 48000 / 60:.0f} min of audio, "
                   f"the most a live run keeps in memory ({MAX_SHOW_SAMPLES / 48000 / 60:.0f} min at 48 kHz); "
                   "split the show into two sheets")
            problems.append(f"cue {cue.id}: error: {msg}")
            out.append(RenderedCue(cue.id, cue.label, np.zeros(0, np.float32), 48000, cue.then,
                                   cue.gain_db, None, CueStatus.ERROR, msg))
            continue
        signals = SignalMemo()  # this cue's sound, built once for its check, relock and render
        try:
            # the one rule for today's conditions and a lock (also the UI's): stale is judged
            # against the rig file; a gas temperature of today re-locks valid cues in memory
            cue, state = cue_for_today(sheet, rig, today, cue, signals=signals)
            if state.status is not CueStatus.OK:
                problems.append(f"cue {cue.id}: {state.status}: {state.message}")
                out.append(RenderedCue(cue.id, cue.label, np.zeros(0, np.float32), 48000, cue.then,
                                       cue.gain_db, state.ceiling_db, state.status, state.message))
                continue
            v = render_cue(sheet, today, cue, signals, flames=flames)  # verify_at: on today's rig
            held += v.samples.size * max(1.0, v.rate_hz / 48000)
            out.append(v)
        except ShowkitError as exc:
            problems.append(f"cue {cue.id}: error: {exc.line()}")
            out.append(RenderedCue(cue.id, cue.label, np.zeros(0, np.float32), 48000, cue.then,
                                   cue.gain_db, None, CueStatus.ERROR, exc.line()))
    return out, problems
