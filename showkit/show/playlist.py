"""Rendered cues ready for playback, and their resampling to a device's rate.

A :class:`RenderedCue` is the one type of a rendered cue: what the cue-sheet
render (:func:`showkit.show.render.render_cue`) returns, what `showkit render`
writes and what the playback engine (:mod:`showkit.show.engine`) plays.  It holds
one cue's samples, already at its locked gain with its fades applied and verified
against the pressure model, with what the verification found (``margin_pa``,
``min_pressure_pa``) and how to verify the samples again at another rate
(``verify_at``).  A cue that may not be played carries its status
(:class:`showkit.show.status.CueStatus`) and why, and no samples.  The engine only
ever scales these samples *down* (operator fader, fade-out, panic), so a
rendered cue's samples are the upper bound of what reaches the speaker.

Resampling for a device that cannot run at the cue's rate happens here, ahead
of the show, never in the audio callback.  It uses the soxr library's
band-limited resampler (Chris Bandy's python-soxr over libsoxr, "HQ" quality).
A band-limited resampler can ring a little above the source's sample peak;
:func:`resample_cue` scales the result down so that its sample peak stays at
or below the source's, so a resampled cue is never louder than the verified one.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Callable

import numpy as np

from showkit.errors import InputError, ShowkitError
from showkit.show.sheet import THEN_VALUES  # one definition: the sheet's
from showkit.show.status import CueStatus

#: What to do about a cue that may not be played, by status.
_STATUS_FIX = {
    CueStatus.STALE: "its lock no longer matches its audio, rig or calibration: re-lock the sheet "
             "with `showkit lock SHEET`",
    CueStatus.OVER: "its gain is above today's ceiling: lower the cue's gain (see `showkit check SHEET "
            "--static ... --temperature ...`)",
    CueStatus.ERROR: "it could not be rendered: see `showkit check SHEET` for the reason",
}


@dataclass(frozen=True)
class RenderedCue:
    """One cue, rendered and verified, ready to play (or refused, with its status and why).

    Parameters
    ----------
    id : str
        The cue's unique id in the sheet.
    label : str
        The presenter's label for the cue.
    samples : numpy.ndarray
        Mono samples, float32, full scale 1.0, at ``rate_hz``, already at the
        cue's locked gain with its fades applied.  Stored as a read-only
        contiguous float32 copy.
    rate_hz : int
        Sample rate of ``samples`` in Hz.
    then : str
        ``"wait"`` (the operator starts the next cue) or ``"next"`` (the next
        cue follows on with no gap).
    gain_db : float
        The cue's locked gain in dB (for the log and the screen).
    ceiling_db : float or None
        The cue's ceiling in dB today (None when unknown, e.g. stale).
    status : CueStatus
        ``ok``, ``stale``, ``over`` or ``error`` (the text is accepted and made a member);
        only ``ok`` cues can be started.
    message : str
        Why the cue is not ok (from the check), or empty.
    verify_at : callable, optional
        ``verify_at(samples, rate_hz) -> dB``, see below.
    margin_pa : float, optional
        From the render's verification: the lowest pressure above ambient at any hole
        minus the reserve line (>= 0), Pa (None when not rendered here).
    min_pressure_pa : float, optional
        From the render's verification: the lowest pressure above ambient at any hole, Pa.
    ride : bool
        Whether the cue's level was ridden under its ceiling (:mod:`showkit.show.rider`).
    plays_nothing : bool
        Every sample is zero (a pause, :attr:`showkit.show.lock.CueCheck.plays_nothing`);
        while the cue is also playable it is :attr:`silent` and its ceiling reads ``silence``.
    flames : tuple, optional
        The predicted flame row of the samples as they play, from the render's
        verification (:func:`showkit.show.render.flame_row`), when the renderer was asked
        for it; kept when the cue is resampled for the device (the same sound, or the
        same brought down a little at that rate).  A preview only: it gates nothing.
    """

    id: str
    label: str
    samples: np.ndarray = field(repr=False)
    rate_hz: int
    then: str = "wait"
    gain_db: float = 0.0
    ceiling_db: float | None = None
    status: CueStatus = CueStatus.OK
    message: str = ""
    #: ``verify_at(samples, rate_hz) -> dB``: how much more gain these exact samples may
    #: take on the rig today (the pressure model's ceiling of them; <= 0 means too loud).
    #: Set by the renderer; :func:`resample_cue` calls it on the resampled samples, so a
    #: cue is verified at the rate that is played.
    verify_at: Callable | None = field(default=None, repr=False, compare=False)
    margin_pa: float | None = None
    min_pressure_pa: float | None = None
    ride: bool = False
    plays_nothing: bool = False
    flames: tuple | None = field(default=None, repr=False, compare=False)

    def __post_init__(self):
        where = f"cue {self.id!r}"
        if self.then not in THEN_VALUES:
            raise InputError(f"'then' must be one of {', '.join(THEN_VALUES)} (got {self.then!r})",
                             where, 'use "wait" or "next"')
        object.__setattr__(self, "status", CueStatus.of(self.status, where))
        rate = int(self.rate_hz)
        if rate <= 0 or rate != self.rate_hz:
            raise InputError(f"sample rate must be a positive whole number of Hz (got {self.rate_hz!r})",
                             where, "this is a bug in the renderer")
        samples = np.ascontiguousarray(np.asarray(self.samples, dtype=np.float32))
        if samples.ndim != 1:
            raise InputError(f"samples must be mono, one dimension (got shape {samples.shape})",
                             where, "mix the cue down to one channel before playback")
        if not np.all(np.isfinite(samples)):
            raise InputError("samples hold NaN or infinite values", where,
                             "re-render the sheet; the source audio may be damaged")
        if samples is self.samples or samples.base is not None:
            samples = samples.copy()
        samples.setflags(write=False)
        object.__setattr__(self, "samples", samples)
        object.__setattr__(self, "rate_hz", rate)

    @property
    def frames(self) -> int:
        """Length in samples."""
        return int(self.samples.shape[0])

    @property
    def duration_s(self) -> float:
        """Length in seconds."""
        return self.frames / self.rate_hz

    @property
    def playable(self) -> bool:
        """True when the cue may be started (status ``ok``)."""
        return self.status is CueStatus.OK

    @property
    def silent(self) -> bool:
        """True when the cue is playable and plays nothing: its ceiling reads ``silence``."""
        return self.plays_nothing and self.playable

    def refusal(self) -> str:
        """Why this cue cannot be started and what to do, as one sentence ('' when playable)."""
        if self.playable:
            return ""
        what, fix = self.refusal_parts()
        return f"cue {self.id!r}: {what} -- {fix}"

    def refusal_parts(self) -> tuple[str, str]:
        """(what is wrong, what to do) for a cue that may not be started."""
        what = f"the cue is {self.status} and cannot be started"
        if self.message:
            what += f" ({self.message})"
        return what, _STATUS_FIX.get(self.status, "")


def resample_cue(cue: RenderedCue, rate_hz: int) -> RenderedCue:
    """The cue at another sample rate, never louder (by sample peak) than the source.

    Parameters
    ----------
    cue : RenderedCue
        The rendered cue.
    rate_hz : int
        The device's rate in Hz.

    Returns
    -------
    RenderedCue
        The same cue with ``samples`` resampled (soxr, "HQ") and ``rate_hz`` set;
        the cue itself when the rate already matches.
    """
    rate_hz = int(rate_hz)
    if rate_hz == cue.rate_hz:
        return cue
    if rate_hz <= 0:
        raise InputError(f"cannot resample to {rate_hz} Hz", f"cue {cue.id!r}",
                         "choose a device with a positive sample rate")
    if cue.frames == 0:
        return replace(cue, samples=np.zeros(0, np.float32), rate_hz=rate_hz)
    out = resample_samples(cue.samples, cue.rate_hz, rate_hz)
    if cue.verify_at is None or not cue.playable:
        return replace(cue, samples=out, rate_hz=rate_hz)
    return _verified_at_rate(cue, out, rate_hz)


def _verified_at_rate(cue: RenderedCue, out: np.ndarray, rate_hz: int) -> RenderedCue:
    """The resampled cue checked against the pressure model at the rate it is played.

    Resampling can move the pressure a little (the tube sees the band-limited
    waveform between the old samples).  Where the resampled samples would pass
    the ceiling, they are brought down to it (never up) and the cue says so; a
    cue that cannot be verified cannot be started.
    """
    try:
        room_db = float(cue.verify_at(out, rate_hz))
        if not math.isfinite(room_db):
            raise InputError(f"the pressure model gave no finite ceiling at {rate_hz} Hz", f"cue {cue.id!r}",
                             "check the rig")
        if room_db >= 0.0:
            return replace(cue, samples=out, rate_hz=rate_hz)
        step = math.floor(room_db / 0.01 + 1e-9) * 0.01  # rounded down to 0.01 dB, as gains are
        lowered = (out.astype(np.float64) * 10.0 ** (step / 20.0)).astype(np.float32)
        again = float(cue.verify_at(lowered, rate_hz))
        if not (math.isfinite(again) and again >= -1e-6):
            raise InputError(f"the cue resampled to {rate_hz} Hz cannot be brought under its ceiling",
                             f"cue {cue.id!r}", "render the cue at the device's rate")
        note = (f"resampled to {rate_hz} Hz, where its pressure is {-room_db:.2f} dB higher: "
                f"played {-step:.2f} dB lower, at {cue.gain_db + step:+.2f} dB")
        return replace(cue, samples=lowered, rate_hz=rate_hz, gain_db=cue.gain_db + step,
                       ceiling_db=None if cue.ceiling_db is None else cue.ceiling_db + step,
                       message=(cue.message + "; " if cue.message else "") + note)
    except ShowkitError as exc:
        return replace(cue, samples=np.zeros(0, np.float32), rate_hz=rate_hz, status=CueStatus.ERROR,
                       message=f"not verified at {rate_hz} Hz: {exc.line()}")


def resample_samples(samples: np.ndarray, from_hz: int, to_hz: int) -> np.ndarray:
    """Mono samples at another rate (soxr "HQ"), float32, never above the source's sample peak.

    The one resampler for everything that is played or written at another rate
    (the live engine, a whole-show render, the lock's check at the show rate).
    """
    import soxr

    x = np.asarray(samples, dtype=np.float32)
    if int(from_hz) == int(to_hz) or x.size == 0:
        return x.copy()
    out = soxr.resample(x, int(from_hz), int(to_hz), quality="HQ").astype(np.float32)
    source_peak = float(np.max(np.abs(x)))
    peak = float(np.max(np.abs(out))) if out.size else 0.0
    if peak > source_peak:
        # Scale in float64, then round down to float32 so the peak cannot round up.
        scaled = out.astype(np.float64) * (source_peak / peak)
        out = scaled.astype(np.float32)
        over = np.abs(out) > source_peak
        out[over] = np.nextafter(out[over], np.float32(0.0))
    return out


def resample_cues(cues: list[RenderedCue], rate_hz: int) -> list[RenderedCue]:
    """Every cue at ``rate_hz`` (Hz), ahead of the show; see :func:`resample_cue`."""
    return [resample_cue(c, rate_hz) for c in cues]
