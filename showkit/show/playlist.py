"""Rendered cues ready for playback, and their resampling to a device's rate.

A :class:`RenderedCue` is what the playback engine (:mod:`showkit.show.engine`)
plays: one cue's samples, already at its locked gain with its fades applied and
verified against the pressure model by the cue-sheet render.  The engine only
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

from dataclasses import dataclass, field, replace

import numpy as np

from showkit.errors import InputError

THEN_VALUES = ("wait", "next")
STATUS_VALUES = ("ok", "stale", "over", "error")

#: What to do about a cue that may not be played, by status.
_STATUS_FIX = {
    "stale": "its lock no longer matches its audio, rig or calibration: re-lock the sheet "
             "with `showkit lock SHEET`",
    "over": "its gain is above today's ceiling: lower the cue's gain (see `showkit check SHEET "
            "--static ...`)",
    "error": "it could not be rendered: see `showkit check SHEET` for the reason",
}


@dataclass(frozen=True)
class RenderedCue:
    """One cue, rendered and verified, ready to play.

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
    status : str
        ``"ok"``, ``"stale"``, ``"over"`` or ``"error"``; only ``"ok"`` cues can be started.
    message : str
        Why the cue is not ok (from the check), or empty.
    """

    id: str
    label: str
    samples: np.ndarray = field(repr=False)
    rate_hz: int
    then: str = "wait"
    gain_db: float = 0.0
    ceiling_db: float | None = None
    status: str = "ok"
    message: str = ""

    def __post_init__(self):
        where = f"cue {self.id!r}"
        if self.then not in THEN_VALUES:
            raise InputError(f"'then' must be one of {', '.join(THEN_VALUES)} (got {self.then!r})",
                             where, 'use "wait" or "next"')
        if self.status not in STATUS_VALUES:
            raise InputError(f"status must be one of {', '.join(STATUS_VALUES)} (got {self.status!r})",
                             where, "this is a bug in the renderer")
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
        """True when the cue may be started (status ``"ok"``)."""
        return self.status == "ok"

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
    import soxr

    rate_hz = int(rate_hz)
    if rate_hz == cue.rate_hz:
        return cue
    if rate_hz <= 0:
        raise InputError(f"cannot resample to {rate_hz} Hz", f"cue {cue.id!r}",
                         "choose a device with a positive sample rate")
    if cue.frames == 0:
        return replace(cue, samples=np.zeros(0, np.float32), rate_hz=rate_hz)
    out = soxr.resample(cue.samples, cue.rate_hz, rate_hz, quality="HQ").astype(np.float32)
    source_peak = float(np.max(np.abs(cue.samples)))
    peak = float(np.max(np.abs(out))) if out.size else 0.0
    if peak > source_peak:
        # Scale in float64, then round down to float32 so the peak cannot round up.
        scaled = out.astype(np.float64) * (source_peak / peak)
        out = scaled.astype(np.float32)
        over = np.abs(out) > source_peak
        out[over] = np.nextafter(out[over], np.float32(0.0))
    return replace(cue, samples=out, rate_hz=rate_hz)


def resample_cues(cues: list[RenderedCue], rate_hz: int) -> list[RenderedCue]:
    """Every cue at ``rate_hz`` (Hz), ahead of the show; see :func:`resample_cue`."""
    return [resample_cue(c, rate_hz) for c in cues]
