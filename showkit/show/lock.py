"""Locking ceilings to cues, telling stale locks, and today's headroom.

``lock`` computes each cue's ceiling for that exact sound on that exact rig
(:func:`showkit.analysis.pressure.signal_report`) and records what it was
computed from: the source samples' hash, the rig's acoustic hash, the
calibration hash, static pressure, reserve and analysis version.  A lock is
valid only for what it was computed from; a changed source, rig or
calibration (or a new analysis version) makes it *stale*.

Today's static pressure and reserve re-derive a valid lock's ceiling by
exact scaling, without re-analysis, for a static pressure up to twice the one
locked with (from half of it after a measurement): the range the rig's loss
family covers, since the gas jets out of the holes faster at a higher pressure
(:mod:`showkit.physics.family`).
"""

from __future__ import annotations

import math
import os
import threading
from collections import OrderedDict
from dataclasses import dataclass, replace
from datetime import datetime, timezone

from showkit import ANALYSIS_VERSION
from showkit.errors import InputError, RigError, SheetError, ShowkitError
from showkit.physics import ceiling as rule
from showkit.physics.family import STATIC_SPAN
from showkit.rigfile import Rig, load_rig
from showkit.show.sheet import Cue, Lock, Sheet, floor_db, load_sheet, rounded_lock
from showkit.show.sources import TONE_RATE_HZ, CueSignal, SignalMemo, signal_for
from showkit.show.status import SILENT_MESSAGE, CueStatus, over_amount_text

#: The rate a whole show is rendered and usually played at, Hz: a cue at another
#: rate is locked at both (see :func:`compute_lock`).
SHOW_RATE_HZ = TONE_RATE_HZ


def sheet_rig(sheet: Sheet) -> Rig:
    """The rig a sheet names (relative to the sheet, or the demo rig)."""
    try:
        return load_rig(sheet.rig_path())
    except RigError as exc:
        fix = exc.fix
        if exc.what == "no such rig file":
            fix = 'fix the sheet\'s rig = "..." (a path relative to the sheet, or "demo")'
        path = sheet.rig_path()
        where = exc.where.replace(str(path), os.path.normpath(str(path))) if path is not None else exc.where
        raise SheetError(exc.what, f"{sheet.path or 'sheet'}: rig ({where})", fix) from None


def sheet_for_today(sheet, rig: Rig | None = None, static_pa: float | None = None,
                    reserve: float | None = None) -> tuple[Sheet, Rig]:
    """``(sheet, rig)``: the sheet (a path, or a :class:`Sheet` already read) and its rig
    (``rig`` when the caller read it already, else the one it names, read here) with today's
    ``static_pa`` (Pa) and ``reserve`` (fraction) over it; None keeps the rig's.  Each is read
    once, and today's numbers go through :meth:`Rig.with_conditions` (the conditions door).
    """
    if not isinstance(sheet, Sheet):
        sheet = load_sheet(sheet)
    rig = rig if rig is not None else sheet_rig(sheet)
    return sheet, rig.with_conditions(static_pa=static_pa, reserve=reserve)


def safe_gain(ceiling_db: float) -> float:
    """The ceiling rounded down to :data:`~showkit.show.sheet.DB_STEP` (never above it)."""
    return floor_db(ceiling_db)


#: The last ceilings :func:`compute_lock` computed, by content (:func:`_ceiling_key`): the Show
#: view's check and the Run view's pre-show check ask for the same cue on the same rig in a row
#: (measured: 63 pressure simulations for one temperature change of a five-cue show, 18 of them
#: repeats).  Values are immutable ``(Ceiling, worst hole, worst time)``; a key that differs in any
#: byte of the rig, the samples, the rate or the analysis version is a miss, never a neighbour's hit.
_CEILINGS: OrderedDict = OrderedDict()
_CEILINGS_MAX = 64
_CEILINGS_GUARD = threading.Lock()
#: Keys being computed now -> an event set when done (a second thread asking waits, not repeats).
_COMPUTING: dict = {}


def _ceiling_key(rig: Rig, samples, rate_hz: int) -> bytes:
    """A digest of everything a cue's ceiling is computed from: the whole rig (pickled: every
    field, today's conditions and the loss family included), the samples' bytes, dtype and
    shape, the rate and :data:`ANALYSIS_VERSION` (BLAKE2b, RFC 7693)."""
    import hashlib
    import pickle

    import numpy as np

    x = np.ascontiguousarray(samples)
    h = hashlib.blake2b(digest_size=32)
    h.update(pickle.dumps(rig, protocol=pickle.HIGHEST_PROTOCOL))
    h.update(f"|{x.dtype.str}|{x.shape}|{int(rate_hz)}|{ANALYSIS_VERSION}|".encode())
    h.update(x.view(np.uint8).reshape(-1).data)
    return h.digest()


def _ceiling_of(rig: Rig, samples, rate_hz: int):
    """``(Ceiling, worst hole, worst time s)`` of a cue's sound (not silent) on a rig.

    A cue whose source is at another rate than :data:`SHOW_RATE_HZ` is checked
    at both rates (resampled as playback resamples it) and the lower ceiling is
    kept: the resampled cue may take the tube a little further.
    """
    key = _ceiling_key(rig, samples, rate_hz)
    while True:
        with _CEILINGS_GUARD:
            if key in _CEILINGS:
                _CEILINGS.move_to_end(key)
                return _CEILINGS[key]
            running = _COMPUTING.get(key)
            if running is None:  # this thread computes it; others asking meanwhile wait for it
                _COMPUTING[key] = threading.Event()
                break
        running.wait()  # then read it (or, if that computation failed, compute it here)
    try:
        value = _ceiling_now(rig, samples, rate_hz)
        with _CEILINGS_GUARD:
            _CEILINGS[key] = value
            while len(_CEILINGS) > _CEILINGS_MAX:
                _CEILINGS.popitem(last=False)
        return value
    finally:
        with _CEILINGS_GUARD:
            _COMPUTING.pop(key).set()


def _ceiling_now(rig: Rig, samples, rate_hz: int):
    """:func:`_ceiling_of` without the memo."""
    from showkit.analysis.pressure import signal_report

    report = signal_report(rig, samples, rate_hz, flames=False)
    if rate_hz != SHOW_RATE_HZ:
        # the cue is also played (and rendered with -o) at the show rate: lock the lower of
        # the two, from the same resampler as playback, so lock, check, render and run agree
        from showkit.show.playlist import resample_samples

        at_show = signal_report(rig, resample_samples(samples, rate_hz, SHOW_RATE_HZ)
                                .astype(float), SHOW_RATE_HZ, flames=False)
        if at_show.ceiling.ceiling_db < report.ceiling.ceiling_db:
            report = at_show
    return report.ceiling, int(report.worst_hole), float(report.worst_time_s)


def compute_lock(rig: Rig, signal: CueSignal) -> Lock:
    """The lock for a cue's sound on a rig.

    A cue whose source is at another rate than :data:`SHOW_RATE_HZ` is checked
    at both rates (resampled as playback resamples it) and the lower ceiling is
    locked: the resampled cue may take the tube a little further.  The same
    sound on the same rig is simulated once per process (:data:`_CEILINGS`).
    """
    if not signal.samples.any():
        c = rule.combine(math.inf, math.inf)
        worst_hole, worst_t = -1, 0.0
    else:
        c, worst_hole, worst_t = _ceiling_of(rig, signal.samples, signal.rate_hz)
    lock = Lock(ceiling_db=c.ceiling_db, pressure_db=c.pressure_db, full_scale_db=c.full_scale_db,
                limited_by=c.limited_by, source_hash=signal.source_hash, rig_hash=rig.acoustic_hash(),
                calibration_hash=rig.calibration_hash(), static_pa=rig.static_pa, reserve=rig.reserve,
                analysis_version=ANALYSIS_VERSION,
                locked_at=datetime.now(timezone.utc).isoformat(timespec="seconds"),
                worst_hole=worst_hole, worst_time_s=worst_t,
                frequency_hz=signal.frequency_hz, to_frequency_hz=signal.to_frequency_hz)
    lock = rounded_lock(lock)  # as the sheet writes it (levels down to 0.01 dB): memory = file
    problem = lock_problem(lock)
    if problem:  # never write a number into a lock that is not finite and consistent
        raise SheetError(f"the computed lock is not usable: {problem}", rig.name,
                         "check the rig file; nothing was locked")
    return lock


def lock_cue(sheet: Sheet, rig: Rig, cue: Cue,
             signals: SignalMemo | None = None) -> tuple[Cue, str | None]:
    """Lock one cue; a gain above the new ceiling is clamped (with a message).

    ``signals``: the pass's signals (:class:`~showkit.show.sources.SignalMemo`), so that
    the check after the lock does not build the cue's sound again; None builds it here.
    """
    lock = compute_lock(rig, signal_for(sheet, rig, cue, signals))
    message = None
    gain = cue.gain_db
    if gain > lock.ceiling_db:
        gain = safe_gain(lock.ceiling_db)
        message = (f"cue {cue.id}: gain {cue.gain_db:+.2f} dB was above its ceiling "
                   f"{lock.ceiling_db:+.2f} dB; clamped to {gain:+.2f} dB")
    return replace(cue, gain_db=gain, lock=lock), message


def lock_sheet(sheet: Sheet, rig: Rig | None = None, only: list[str] | None = None,
               progress=None, signals: SignalMemo | None = None) -> list[str]:
    """Lock every cue (or the ids in ``only``) in place; returns the clamp messages.

    ``signals``: a :class:`~showkit.show.sources.SignalMemo` to keep the signals in for a
    check that follows (:func:`check_sheet` with the same memo); None keeps none.
    """
    rig = rig or sheet_rig(sheet)
    messages = []
    targets = [c for c in sheet.cues if only is None or c.id in only]
    for k, cue in enumerate(targets):
        if progress:
            progress(k, len(targets), cue.id)
        new, message = lock_cue(sheet, rig, cue, signals)
        sheet.replace_cue(cue.id, gain_db=new.gain_db, lock=new.lock)
        if message:
            messages.append(message)
    if progress:
        progress(len(targets), len(targets), None)
    return messages


@dataclass(frozen=True)
class CueCheck:
    """A cue's state today: ``status`` is a :class:`~showkit.show.status.CueStatus`
    (``ok``, ``over``, ``stale`` or ``error``; the text is accepted and made a member).

    ``plays_nothing``: every sample of the cue is zero (a pause).  Such a cue is
    :attr:`silent` while it is ok: its ceiling is then only the cap on the gain of
    silence, shown as ``silence`` (:func:`showkit.show.status.ceiling_text`); the rules
    (the gain at or below the ceiling) are those of any cue.
    """

    id: str
    gain_db: float
    ceiling_db: float | None
    headroom_db: float | None
    status: CueStatus
    message: str
    limited_by: str | None = None
    plays_nothing: bool = False

    def __post_init__(self):
        object.__setattr__(self, "status", CueStatus.of(self.status, f"cue {self.id!r}"))

    @property
    def silent(self) -> bool:
        """True when the cue is ok and plays nothing: its ceiling reads ``silence``."""
        return self.plays_nothing and self.status is CueStatus.OK

    def to_json(self) -> dict:
        return {"id": self.id, "gain_db": self.gain_db, "ceiling_db": self.ceiling_db,
                "headroom_db": self.headroom_db, "status": self.status, "message": self.message,
                "limited_by": self.limited_by, "silent": self.silent}


def lock_problem(lock: Lock) -> str | None:
    """Why a lock's numbers cannot be trusted, or ``None`` when they are finite and consistent.

    The static pressure, temperature-free reserve and the limits go through the same
    checks as today's conditions (:mod:`showkit.conditions`); the ceiling must be the
    lower of its two limits, as :func:`showkit.physics.ceiling.combine` gives it.
    """
    from showkit.conditions import check_reserve, check_static_pa

    def bad(value, inf_ok=False):
        return (not isinstance(value, (int, float)) or isinstance(value, bool) or math.isnan(value)
                or (math.isinf(value) and not (inf_ok and value > 0)))

    try:
        check_static_pa(lock.static_pa, "lock static_pa")
        check_reserve(lock.reserve, "lock reserve")
    except (InputError, TypeError) as exc:
        what = exc.what if isinstance(exc, InputError) else str(exc)
        return f"the lock's conditions are damaged ({what})"
    for name, inf_ok in (("ceiling_db", False), ("pressure_db", True), ("full_scale_db", True),
                         ("worst_time_s", False)):
        if bad(getattr(lock, name), inf_ok):
            return f"the lock's {name} is not a finite number ({getattr(lock, name)!r})"
    for name in ("frequency_hz", "to_frequency_hz"):
        value = getattr(lock, name)
        if value is not None and (bad(value) or value <= 0):
            return f"the lock's {name} is not a positive finite number ({value!r})"
    try:
        expected = rule.combine(lock.pressure_db, lock.full_scale_db)
    except ValueError as exc:
        return f"the lock's limits are damaged ({exc})"
    if abs(expected.ceiling_db - lock.ceiling_db) > 1e-6 or expected.limited_by != lock.limited_by:
        return (f"the lock's ceiling {lock.ceiling_db!r} dB ({lock.limited_by}) is not the lower of its "
                f"limits ({expected.ceiling_db!r} dB, {expected.limited_by})")
    if not all(isinstance(h, str) and h for h in (lock.source_hash, lock.rig_hash, lock.calibration_hash)):
        return "the lock's hashes are missing"
    return None


def stale_reason(rig: Rig, lock: Lock | None, signal: CueSignal | None) -> str | None:
    """Why a lock is not valid for this sound and rig, or ``None`` if it is.

    A lock whose numbers are not finite and consistent (:func:`lock_problem`) is
    stale too: it is never re-derived into a ceiling.
    """
    if lock is None:
        return "not locked yet"
    problem = lock_problem(lock)
    if problem:
        return problem
    if lock.analysis_version != ANALYSIS_VERSION:
        return f"locked with analysis version {lock.analysis_version}, this is {ANALYSIS_VERSION}"
    if lock.rig_hash != rig.acoustic_hash():
        return "the rig's tube, holes or gas changed since the lock"
    if lock.calibration_hash != rig.calibration_hash():
        return "the rig's drive calibration changed since the lock"
    if signal is not None and lock.source_hash != signal.source_hash:
        return "the sound changed since the lock (audio file, passage, fades or tone)"
    return None


def today_ceiling(lock: Lock, static_pa: float, reserve: float) -> rule.Ceiling:
    """A valid lock's ceiling re-derived for today's static pressure and reserve."""
    locked = rule.Ceiling(lock.ceiling_db, lock.pressure_db, lock.full_scale_db, lock.limited_by)
    return rule.rescale(locked, lock.static_pa, static_pa, lock.reserve, reserve)


def over_message(over_db: float, ceiling_db: float, lock: Lock, static_pa: float, reserve: float) -> str:
    """Why a cue is over today's ceiling, by how much, and what to do (DEVELOPERS.md Methods §7: the
    pressure limit moves with (1 - reserve) x static pressure).

    The refusal stands (safety fails closed); the message names how much over it is and, when
    today's conditions are what moved the ceiling below a gain locked at it (a static pressure
    lower than at the lock, or a larger reserve), says so, so that re-locking is the fix.

    Parameters
    ----------
    over_db : float
        Gain minus today's ceiling, dB (above zero).
    ceiling_db : float
        Today's ceiling, dB.
    lock : Lock
        The cue's lock (its static pressure, Pa, and reserve, fraction).
    static_pa : float
        Today's static pressure, Pa.
    reserve : float
        Today's reserve, fraction of the static pressure.
    """
    causes = []
    if static_pa < lock.static_pa:
        causes.append(f"today's static pressure, {static_pa:.2f} Pa, is lower than at the lock, "
                      f"{lock.static_pa:.2f} Pa")
    if reserve > lock.reserve:
        causes.append(f"today's reserve, {reserve:g}, is larger than at the lock, {lock.reserve:g}")
    fix = f"bring it down to {safe_gain(ceiling_db):+.2f} dB"
    if causes:
        fix = f"set the rig to today's reading and re-lock (`showkit lock SHEET`), or {fix}"
    return "; ".join([f"gain is {over_amount_text(over_db)} dB above today's ceiling", *causes, fix])


def check_cue(sheet: Sheet, rig: Rig, cue: Cue, static_pa: float | None = None,
              reserve: float | None = None, signal: CueSignal | None = None,
              signals: SignalMemo | None = None) -> CueCheck:
    """The cue's status, ceiling and headroom for today's conditions.

    ``static_pa`` and ``reserve`` (None: the rig's) go through
    :func:`showkit.conditions.make_conditions` via :meth:`Rig.with_conditions`.
    ``signal``: the cue's signal when already made; else from ``signals`` (the pass's
    :class:`~showkit.show.sources.SignalMemo`) or built here.
    """
    rig = rig.with_conditions(static_pa=static_pa, reserve=reserve)
    static, res = rig.static_pa, rig.reserve
    try:
        signal = signal or signal_for(sheet, rig, cue, signals)
    except ShowkitError as exc:
        return CueCheck(cue.id, cue.gain_db, None, None, CueStatus.ERROR, exc.line())
    reason = stale_reason(rig, cue.lock, signal)
    if reason:
        return CueCheck(cue.id, cue.gain_db, None, None, CueStatus.STALE,
                        f"{reason}: run `showkit lock {sheet.path or 'SHEET'}` to re-lock")
    # the loss family reaches down to still gas before a measurement; a measured one does not
    top = STATIC_SPAN * cue.lock.static_pa
    bottom = cue.lock.static_pa / STATIC_SPAN if rig.loss_family and rig.loss_family.measured else 0.0
    if not bottom - 1e-9 <= static <= top + 1e-9:
        return CueCheck(cue.id, cue.gain_db, None, None, CueStatus.STALE,
                        f"today's static pressure {static:g} Pa is outside the {bottom:g} to {top:g} Pa "
                        f"the lock's loss family covers (the gas jets out of the holes faster or slower): set "
                        f"the rig's static_pressure to today's reading and run `showkit lock "
                        f"{sheet.path or 'SHEET'}`")
    try:
        c = today_ceiling(cue.lock, static, res)
    except ValueError as exc:  # pragma: no cover - lock_problem refuses these first
        return CueCheck(cue.id, cue.gain_db, None, None, CueStatus.STALE, f"the lock is damaged ({exc})")
    headroom = c.ceiling_db - cue.gain_db
    if not math.isfinite(headroom):  # pragma: no cover - a finite lock gives a finite ceiling
        return CueCheck(cue.id, cue.gain_db, None, None, CueStatus.STALE, "the lock gives no finite ceiling")
    if headroom < -1e-9:
        return CueCheck(cue.id, cue.gain_db, c.ceiling_db, headroom, CueStatus.OVER,
                        over_message(-headroom, c.ceiling_db, cue.lock, static, res),
                        c.limited_by, signal.silent)
    if signal.silent:  # the same rule as any cue above; only what it says differs
        return CueCheck(cue.id, cue.gain_db, c.ceiling_db, headroom, CueStatus.OK, SILENT_MESSAGE,
                        c.limited_by, plays_nothing=True)
    return CueCheck(cue.id, cue.gain_db, c.ceiling_db, headroom, CueStatus.OK,
                    f"{headroom:.1f} dB below the ceiling ({c.limited_by.replace('_', ' ')})", c.limited_by)


def check_sheet(sheet: Sheet, rig: Rig | None = None, static_pa: float | None = None,
                reserve: float | None = None, signals: SignalMemo | None = None) -> list[CueCheck]:
    """:func:`check_cue` for every cue in show order (``signals``: see :func:`check_cue`)."""
    rig = (rig or sheet_rig(sheet)).with_conditions(static_pa=static_pa, reserve=reserve)
    return [check_cue(sheet, rig, c, signals=signals) for c in sheet.cues]
