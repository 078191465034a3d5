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
from dataclasses import dataclass, replace
from datetime import datetime, timezone

from showkit import ANALYSIS_VERSION
from showkit.errors import ShowkitError
from showkit.physics import ceiling as rule
from showkit.physics.family import STATIC_SPAN
from showkit.rigfile import Rig, load_rig
from showkit.show.sheet import Cue, Lock, Sheet
from showkit.show.sources import CueSignal, cue_signal

#: Gains are clamped to the ceiling rounded down to this step, dB.
GAIN_STEP_DB = 0.01


def sheet_rig(sheet: Sheet) -> Rig:
    """The rig a sheet names (relative to the sheet, or the demo rig)."""
    from showkit.errors import RigError, SheetError

    try:
        return load_rig(sheet.rig_path())
    except RigError as exc:
        fix = exc.fix
        if exc.what == "no such rig file":
            fix = 'fix the sheet\'s rig = "..." (a path relative to the sheet, or "demo")'
        raise SheetError(exc.what, f"{sheet.path or 'sheet'}: rig ({exc.where})", fix) from None


def safe_gain(ceiling_db: float) -> float:
    """The ceiling rounded down to :data:`GAIN_STEP_DB` (never above it)."""
    return math.floor(ceiling_db / GAIN_STEP_DB + 1e-9) * GAIN_STEP_DB


def compute_lock(rig: Rig, signal: CueSignal) -> Lock:
    """The lock for a cue's sound on a rig."""
    from showkit.analysis.pressure import signal_report

    if not signal.samples.any():
        c = rule.combine(math.inf, math.inf)
        worst_hole, worst_t = -1, 0.0
    else:
        report = signal_report(rig, signal.samples, signal.rate_hz, flames=False)
        c = report.ceiling
        worst_hole, worst_t = report.worst_hole, report.worst_time_s
    return Lock(ceiling_db=c.ceiling_db, pressure_db=c.pressure_db, full_scale_db=c.full_scale_db,
                limited_by=c.limited_by, source_hash=signal.source_hash, rig_hash=rig.acoustic_hash(),
                calibration_hash=rig.calibration_hash(), static_pa=rig.static_pa, reserve=rig.reserve,
                analysis_version=ANALYSIS_VERSION,
                locked_at=datetime.now(timezone.utc).isoformat(timespec="seconds"),
                worst_hole=worst_hole, worst_time_s=worst_t,
                frequency_hz=signal.frequency_hz, to_frequency_hz=signal.to_frequency_hz)


def lock_cue(sheet: Sheet, rig: Rig, cue: Cue) -> tuple[Cue, str | None]:
    """Lock one cue; a gain above the new ceiling is clamped (with a message)."""
    lock = compute_lock(rig, cue_signal(sheet, rig, cue))
    message = None
    gain = cue.gain_db
    if gain > lock.ceiling_db:
        gain = safe_gain(lock.ceiling_db)
        message = (f"cue {cue.id}: gain {cue.gain_db:+.2f} dB was above its ceiling "
                   f"{lock.ceiling_db:+.2f} dB; clamped to {gain:+.2f} dB")
    return replace(cue, gain_db=gain, lock=lock), message


def lock_sheet(sheet: Sheet, rig: Rig | None = None, only: list[str] | None = None,
               progress=None) -> list[str]:
    """Lock every cue (or the ids in ``only``) in place; returns the clamp messages."""
    rig = rig or sheet_rig(sheet)
    messages = []
    targets = [c for c in sheet.cues if only is None or c.id in only]
    for k, cue in enumerate(targets):
        if progress:
            progress(k, len(targets), cue.id)
        new, message = lock_cue(sheet, rig, cue)
        sheet.replace_cue(cue.id, gain_db=new.gain_db, lock=new.lock)
        if message:
            messages.append(message)
    if progress:
        progress(len(targets), len(targets), None)
    return messages


@dataclass(frozen=True)
class CueCheck:
    """A cue's state today: ``status`` is ``"ok"``, ``"over"``, ``"stale"`` or ``"error"``."""

    id: str
    gain_db: float
    ceiling_db: float | None
    headroom_db: float | None
    status: str
    message: str
    limited_by: str | None = None

    def to_json(self) -> dict:
        return {"id": self.id, "gain_db": self.gain_db, "ceiling_db": self.ceiling_db,
                "headroom_db": self.headroom_db, "status": self.status, "message": self.message,
                "limited_by": self.limited_by}


def stale_reason(rig: Rig, lock: Lock | None, signal: CueSignal | None) -> str | None:
    """Why a lock is not valid for this sound and rig, or ``None`` if it is."""
    if lock is None:
        return "not locked yet"
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


def check_cue(sheet: Sheet, rig: Rig, cue: Cue, static_pa: float | None = None,
              reserve: float | None = None, signal: CueSignal | None = None) -> CueCheck:
    """The cue's status, ceiling and headroom for today's conditions."""
    static = rig.static_pa if static_pa is None else static_pa
    res = rig.reserve if reserve is None else reserve
    try:
        signal = signal or cue_signal(sheet, rig, cue)
    except ShowkitError as exc:
        return CueCheck(cue.id, cue.gain_db, None, None, "error", exc.line())
    reason = stale_reason(rig, cue.lock, signal)
    if reason:
        return CueCheck(cue.id, cue.gain_db, None, None, "stale",
                        f"{reason}: run `showkit lock {sheet.path or 'SHEET'}` to re-lock")
    # the loss family reaches down to still gas before a measurement; a measured one does not
    top = STATIC_SPAN * cue.lock.static_pa
    bottom = cue.lock.static_pa / STATIC_SPAN if rig.loss_family and rig.loss_family.measured else 0.0
    if not bottom - 1e-9 <= static <= top + 1e-9:
        return CueCheck(cue.id, cue.gain_db, None, None, "stale",
                        f"today's static pressure {static:g} Pa is outside the {bottom:g} to {top:g} Pa "
                        f"the lock's loss family covers (the gas jets out of the holes faster or slower): set "
                        f"the rig's static_pressure to today's reading and run `showkit lock "
                        f"{sheet.path or 'SHEET'}`")
    c = today_ceiling(cue.lock, static, res)
    headroom = c.ceiling_db - cue.gain_db
    if headroom < -1e-9:
        return CueCheck(cue.id, cue.gain_db, c.ceiling_db, headroom, "over",
                        f"gain is {-headroom:.2f} dB above today's ceiling: bring it down to "
                        f"{safe_gain(c.ceiling_db):+.2f} dB", c.limited_by)
    return CueCheck(cue.id, cue.gain_db, c.ceiling_db, headroom, "ok",
                    f"{headroom:.1f} dB below the ceiling ({c.limited_by.replace('_', ' ')})", c.limited_by)


def check_sheet(sheet: Sheet, rig: Rig | None = None, static_pa: float | None = None,
                reserve: float | None = None) -> list[CueCheck]:
    """:func:`check_cue` for every cue in show order."""
    rig = rig or sheet_rig(sheet)
    return [check_cue(sheet, rig, c, static_pa, reserve) for c in sheet.cues]
