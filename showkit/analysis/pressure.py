"""Ceilings and flame frames for tracks, passages and generated signals.

Audio in (a file, a passage of it, or samples), pressure-model results out:
the drive ceiling, where and when the tube comes closest to the safe line,
and the flame row per frame at that level.

A ceiling here is *robust*: the lowest over the members of the rig's loss
family (:mod:`showkit.physics.family`), each calibrated with the same reading,
so that it holds for every tube in the family.  The flame frames use the best
estimate (the flowing-gas hole model, or the measured fit), at that ceiling.
The scan (:mod:`showkit.analysis.scan`) uses the best estimate alone.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np

from showkit.analysis.audio import audio_info, mono, read_blocks
from showkit.errors import AudioError, RigError
from showkit.physics import ceiling as ceil_rule
from showkit.physics.family import LossPoint, members
from showkit.physics.flames import row_contrast
from showkit.physics.response import HoleFilters, PressureFrames, design_hole_filters, simulate
from showkit.rigfile import Rig


#: Passages up to this many samples at the analysis rate are kept in memory
#: between the ceiling pass and the flames pass (float64: 64 MB).
KEEP_SAMPLES = 1 << 23


@dataclass
class PassageReport:
    """A ceiling and the flames at it, for one passage.

    Attributes
    ----------
    ceiling : Ceiling
        ``ceiling_db``, ``pressure_db``, ``full_scale_db``, ``limited_by``.
    peak : float
        Digital peak of the passage as recorded (1.0 = full scale).
    swing_pa : float
        Largest swing below the static level at unit gain (envelope bound), Pa.
    worst_hole : int
    worst_time_s : float
        From the start of the file (passages) or signal, s.
    frames : PressureFrames or None
        Flame frames at the ceiling (``height``, ``air_in``, ``envelope``).
    static_pa, reserve : float
        What the ceiling was computed for.
    start_s, end_s : float
    drive_text : str
        Which calibration and drive model the ceiling rests on.
    family_text : str
        Which loss family the ceiling holds for (empty: the best estimate alone).
    set_by : str
        The member of the family that set the ceiling.
    """

    ceiling: ceil_rule.Ceiling
    peak: float
    swing_pa: float
    worst_hole: int
    worst_time_s: float
    frames: PressureFrames | None
    static_pa: float
    reserve: float
    start_s: float
    end_s: float
    drive_text: str
    family_text: str = ""
    set_by: str = ""

    @property
    def ceiling_db(self) -> float:
        return self.ceiling.ceiling_db

    @property
    def output_peak_dbfs(self) -> float:
        return -math.inf if self.peak <= 0 else 20.0 * math.log10(self.peak) + self.ceiling_db

    @property
    def min_pressure_pa(self) -> float:
        """Lowest pressure above ambient at any hole at the ceiling, Pa."""
        return self.static_pa - 10.0 ** (self.ceiling_db / 20.0) * self.swing_pa

    @property
    def contrast_per_frame(self) -> np.ndarray:
        if self.frames is None or self.frames.height is None:
            return np.zeros(0)
        return row_contrast(self.frames.height)

    @property
    def contrast(self) -> float:
        """Median flame-row contrast over the passage at the ceiling (0 to 1)."""
        c = self.contrast_per_frame
        return float(np.median(c)) if c.size else 0.0

    def to_json(self) -> dict:
        return {
            "ceiling_db": self.ceiling_db,
            "output_peak_dbfs": self.output_peak_dbfs,
            "limited_by": self.ceiling.limited_by,
            "min_pressure_pa": self.min_pressure_pa,
            "worst_hole": self.worst_hole,
            "worst_time_s": self.worst_time_s,
            "contrast": self.contrast,
            "pressure_ceiling_db": self.ceiling.pressure_db,
            "full_scale_ceiling_db": self.ceiling.full_scale_db,
            "static_pressure_pa": self.static_pa,
            "reserve": self.reserve,
            "start_s": self.start_s,
            "end_s": self.end_s,
            "drive": self.drive_text,
            "loss_family": self.family_text,
            "ceiling_model": self.set_by,
        }


#: Rigs whose designed filters (and loss family) are kept per process.
_FILTERS_KEPT = 8


class _ResponseKey:
    """A rig, compared and hashed by what shapes its response: (acoustic hash, calibration
    hash).  Static pressure and reserve do not, so today's manometer reading reuses the filters."""

    __slots__ = ("rig", "key")

    def __init__(self, rig: Rig):
        self.rig = rig
        self.key = (rig.acoustic_hash(), rig.calibration_hash())

    def __hash__(self) -> int:
        return hash(self.key)

    def __eq__(self, other) -> bool:
        return isinstance(other, _ResponseKey) and self.key == other.key


def hole_filters(rig: Rig) -> HoleFilters:
    """The rig's impulse responses, designed once per process for each rig."""
    if rig.geometry.hole_count == 0:
        raise AudioError("this rig has no holes: there are no flames to keep alight",
                         rig.name, "add [holes] to the rig file")
    return _designed_filters(_ResponseKey(rig))


@lru_cache(maxsize=_FILTERS_KEPT)
def _designed_filters(key: _ResponseKey) -> HoleFilters:
    rig = key.rig
    try:
        return design_hole_filters(rig.model, rig.drive, calibration_model=rig.calibration_model(rig.model))
    except ValueError as exc:
        raise RigError(f"the pressure model cannot be built from this rig ({exc})", rig.name,
                       "check the rig file's [tube], [holes] and [drive] values") from None


def member_label(point: LossPoint) -> str:
    """A member of the loss family in a few words."""
    if point.flow_m_s <= 0 and point.resistance_pa_s_m3 <= 0:
        return "still gas, inertive holes"
    if point.flow_m_s <= 0:
        return f"still gas, hole resistance {point.resistance_pa_s_m3:.3g} Pa s/m3"
    return (f"gas jet {point.flow_m_s:.2f} m/s (bias flow)"
            + (f", resistance {point.resistance_pa_s_m3:.3g} Pa s/m3" if point.resistance_pa_s_m3 > 0 else ""))


def family_filters(rig: Rig) -> tuple:
    """``(label, HoleFilters)`` for every member of the rig's loss family, best estimate first."""
    return _family_filters(_ResponseKey(rig))


@lru_cache(maxsize=_FILTERS_KEPT)
def _family_filters(key: _ResponseKey) -> tuple:
    rig = key.rig
    best = hole_filters(rig)
    fam = rig.loss_family
    chosen = members(fam, rig.drive.reference_frequency_hz,
                     calibration_gas=rig.calibration_gas if rig.calibrated_elsewhere else None)
    out = [(member_label(fam.best) + " (best estimate)", best)]
    for point in chosen:
        if point == fam.best:
            continue
        model = fam.model(point)
        try:
            filters = design_hole_filters(model, rig.drive, rate_hz=best.rate_hz,
                                          calibration_model=rig.calibration_model(model))
        except ValueError as exc:  # fails closed, in one line, as the best estimate's
            raise RigError(f"the pressure model of a loss-family member ({member_label(point)}) cannot be "
                           f"built ({exc})", rig.name, "check the rig file's [tube], [holes] and [drive] values") \
                from None
        out.append((member_label(point), filters))
    return tuple(out)


def _robust(rig: Rig, first: PressureFrames, run_member, robust: bool) -> tuple[PressureFrames, str, str]:
    """The member pass with the largest swing (the best estimate's is ``first``)."""
    if not robust:
        return first, "best estimate", ""
    members_ = family_filters(rig)
    worst, label = first, members_[0][0]
    for name, filters in members_[1:]:
        got = run_member(filters)
        if got.worst_pa > worst.worst_pa:
            worst, label = got, name
    return worst, label, rig.loss_family.describe()


def _report(rig: Rig, filters: HoleFilters, first: PressureFrames, peak: float, rerun,
            start_s: float, end_s: float, flames: bool, run_member=None,
            robust: bool = True) -> PassageReport:
    # fails closed: a NaN or infinite pressure, or a loud signal that moves no gas at
    # all, is an error, never the full-scale limit
    if not math.isfinite(first.worst_pa) or not math.isfinite(peak):
        raise RigError(f"the pressure model gave a non-finite pressure (largest swing {first.worst_pa!r} Pa)",
                       rig.name, "check the rig file's [tube], [holes] and [drive] values")
    worst, set_by, family_text = _robust(rig, first, run_member, robust)
    if not math.isfinite(worst.worst_pa):
        raise RigError(f"a loss-family member gave a non-finite pressure ({set_by})",
                       rig.name, "check the rig file's [tube], [holes] and [drive] values")
    try:
        pressure_db = ceil_rule.pressure_ceiling_db(worst.worst_pa, rig.static_pa, rig.reserve)
        result = ceil_rule.combine(pressure_db, ceil_rule.full_scale_db(peak))
    except ValueError as exc:
        raise RigError(f"no ceiling can be computed ({exc})", rig.name,
                       "check the rig file and today's static pressure and reserve") from None
    frames = first
    if flames:
        # a flames-only pass (real pressure, half the work) at the ceiling, best
        # estimate; the envelope at unit gain is the first pass's
        second = rerun(10.0 ** (result.ceiling_db / 20.0))
        frames = replace(first, height=second.height, air_in=second.air_in, gain=second.gain)
    return PassageReport(ceiling=result, peak=peak, swing_pa=worst.worst_pa,
                         worst_hole=worst.worst_hole, worst_time_s=start_s + worst.worst_time_s,
                         frames=frames, static_pa=rig.static_pa, reserve=rig.reserve,
                         start_s=start_s, end_s=end_s, drive_text=rig.describe_drive(),
                         family_text=family_text, set_by=set_by)


def _at_model_rate(rig: Rig, x: np.ndarray, rate_hz: int) -> tuple[HoleFilters, np.ndarray]:
    """The rig's hole filters and ``x`` at their rate (:func:`to_model_rate`)."""
    filters = hole_filters(rig)
    return filters, to_model_rate(x, int(rate_hz), filters.rate_hz)


#: Silence added at both ends before a spectral upsampling, s (keeps the circular
#: interpolation's tails from wrapping the end of a signal onto its start).
UPSAMPLE_PAD_S = 0.25


def to_model_rate(x: np.ndarray, from_hz: int, to_hz: int) -> np.ndarray:
    """``x`` (mono) resampled from ``from_hz`` to the model's ``to_hz``.

    Down: soxr's band-limited resampler ("HQ"), whose pass band holds the model's band (the
    model's rate leaves room above the plane-wave limit).  Up -- a file at a rate below the
    model's: every component up to the file's Nyquist frequency kept at unit gain, by zero
    padding its spectrum (the DFT method of ``scipy.signal.resample``; Smith, *Digital Audio
    Resampling*, CCRMA, 2002, on band-limited interpolation), because a player at the file's own
    rate plays that top band too.  soxr's transition band there hid it from the ceiling: a
    1917-Hz tone in a 4-kHz file read 5.8 dB above the same tone at 48 kHz on a rig with a
    50-mm bore (plane-wave limit 2.9 kHz).
    """
    if from_hz == to_hz:
        return x
    if from_hz > to_hz:
        import soxr

        return soxr.resample(x, from_hz, to_hz, quality="HQ")
    pad = int(round(UPSAMPLE_PAD_S * from_hz))
    y = np.concatenate([np.zeros(pad), np.asarray(x, float), np.zeros(pad)])
    n_in = y.size
    n_out = int(round(n_in * to_hz / from_hz))
    spec = np.fft.rfft(y)
    out = np.zeros(n_out // 2 + 1, complex)
    out[:spec.size] = spec
    if n_in % 2 == 0:  # the input's Nyquist bin holds both halves of its component: split it
        out[n_in // 2] *= 0.5
    z = np.fft.irfft(out, n_out) * (n_out / n_in)
    start = int(round(pad * to_hz / from_hz))
    return z[start:start + int(round(x.size * to_hz / from_hz))]


def signal_report(rig: Rig, samples: np.ndarray, rate_hz: int, flames: bool = True,
                  start_s: float = 0.0, robust: bool = True) -> PassageReport:
    """Ceiling (and flames at it) of a signal given as samples.

    Parameters
    ----------
    rig : Rig
    samples : ndarray
        Mono drive signal in digital full scale, or (N, channels) to be averaged.
    rate_hz : int
        Its sample rate, Hz.
    flames : bool
        Also compute the flame frames at the ceiling (a second pass).
    start_s : float
        Time of the first sample, for reporting, s.
    robust : bool
        The ceiling is the lowest over the rig's loss family (default); with
        False, the best estimate's alone.
    """
    x = mono(samples)
    if x.size == 0:
        raise AudioError("the signal holds no samples", None, "give a longer signal")
    filters, drive = _at_model_rate(rig, x, rate_hz)
    peak = float(np.max(np.abs(x)))
    first = simulate(filters, drive)

    def rerun(gain):
        return simulate(filters, drive, static_pa=rig.static_pa, gain=gain, envelope=False)

    return _report(rig, filters, first, peak, rerun, start_s, start_s + x.size / rate_hz, flames,
                   lambda member: simulate(member, drive), robust)


def _prefetch(blocks, depth: int = 8):
    """Iterate ``blocks`` in a background thread (decoding overlaps the FFTs).

    Errors raised by the source (e.g. :class:`AudioError`) are re-raised here,
    in order; stopping early stops the thread.
    """
    import queue
    import threading

    q: queue.Queue = queue.Queue(depth)
    stop = threading.Event()
    end = object()

    def put(item) -> bool:
        while not stop.is_set():
            try:
                q.put(item, timeout=0.1)
                return True
            except queue.Full:
                continue
        return False

    def work():
        try:
            for b in blocks:
                if not put(b):
                    return
        except BaseException as exc:  # handed over to the consumer
            put(exc)
            return
        put(end)

    thread = threading.Thread(target=work, daemon=True, name="showkit-decode")
    thread.start()
    try:
        while True:
            item = q.get()
            if item is end:
                return
            if isinstance(item, BaseException):
                raise item
            yield item
    finally:
        stop.set()
        thread.join(timeout=5.0)


def passage_report(rig: Rig, path, start_s: float | None = None, end_s: float | None = None,
                   flames: bool = True, robust: bool = True) -> PassageReport:
    """Ceiling (and flames at it) of a file or a passage of it, streamed in blocks.

    The ceiling is robust over the loss family unless ``robust`` is False (see
    :func:`signal_report`); a passage too long to keep is decoded once more per member.
    """
    info = audio_info(path)
    filters = hole_filters(rig)
    peak = [0.0]

    def track_peak(block):
        if block.size:
            peak[0] = max(peak[0], float(np.max(np.abs(block))))

    # a passage short enough is kept (resampled) for the flames pass instead of decoding it twice
    span = (info.duration_s if end_s is None else float(end_s)) - (start_s or 0.0)
    kept = [] if span * filters.rate_hz <= KEEP_SAMPLES else None

    def first_blocks():
        for block in _prefetch(read_blocks(path, filters.rate_hz, start_s, end_s, on_native=track_peak)):
            if kept is not None:
                kept.append(block)
            yield block

    first = simulate(filters, first_blocks())
    start = 0.0 if start_s is None else float(start_s)
    end = info.duration_s if end_s is None else float(end_s)

    def rerun(gain):
        source = kept if kept is not None else _prefetch(read_blocks(path, filters.rate_hz, start_s, end_s))
        return simulate(filters, source, static_pa=rig.static_pa, gain=gain, envelope=False)

    def member(member_filters):
        source = kept if kept is not None else _prefetch(read_blocks(path, filters.rate_hz, start_s, end_s))
        return simulate(member_filters, source)

    return _report(rig, filters, first, peak[0], rerun, start, end, flames, member, robust)


def frame_lag(rig: Rig) -> int:
    """Flame frames by which the hole responses are late (their taper delay, rounded).

    Frame ``k + frame_lag(rig)`` of a pass is the flame row for the drive's
    frame ``k`` (the scan's map uses the same shift).
    """
    filters = hole_filters(rig)
    return int(round(filters.delay / filters.frame_samples))


def signal_flames(rig: Rig, samples: np.ndarray, rate_hz: int, gain_db: float = 0.0) -> PressureFrames:
    """Flame frames of a signal played at ``gain_db`` (no ceiling search: the row at that level).

    The same pass as the flames of :func:`signal_report` at its ceiling, at a
    given gain instead: ``height`` and ``air_in`` per frame and hole.

    Parameters
    ----------
    samples : ndarray
        Mono drive signal in digital full scale (or (N, channels), averaged).
    rate_hz : int
        Its sample rate, Hz.
    gain_db : float
        Gain applied to the samples, dB (finite).
    """
    if not math.isfinite(gain_db):
        raise AudioError(f"the gain {gain_db!r} dB is not a finite number", None, "give a gain in dB")
    filters, drive = _at_model_rate(rig, mono(samples), rate_hz)
    return simulate(filters, drive, static_pa=rig.static_pa, gain=10.0 ** (gain_db / 20.0), envelope=False)


def passage_flames(rig: Rig, path, start_s: float | None = None, end_s: float | None = None,
                   gain_db: float = 0.0) -> PressureFrames:
    """Flame frames of a file or passage played at ``gain_db``, streamed as :func:`passage_report` does.

    At ``gain_db`` equal to the passage's ceiling these are the ceiling's own
    flame frames (the same blocks, filters and gain).
    """
    if not math.isfinite(gain_db):
        raise AudioError(f"the gain {gain_db!r} dB is not a finite number", str(path), "give a gain in dB")
    filters = hole_filters(rig)
    blocks = _prefetch(read_blocks(path, filters.rate_hz, start_s, end_s))
    return simulate(filters, blocks, static_pa=rig.static_pa, gain=10.0 ** (gain_db / 20.0), envelope=False)
