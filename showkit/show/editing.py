"""The editing model of a cue sheet: edits that stop at the ceiling, undo, autosave.

Front-end free (no terminal UI here): the terminal UI's session builds on it and a
command-line tool can use it as it is.  An :class:`SheetEditor` holds one open
:class:`~showkit.show.sheet.Sheet` and what is known of each cue today (its
:class:`~showkit.show.lock.CueCheck`, from the pre-show rule of
:func:`showkit.show.preshow.cue_for_today`, which the caller computes and puts in
:attr:`SheetEditor.checks`).

The rules:

- **A gain stops at the ceiling.**  :meth:`SheetEditor.set_gain` never sets a gain
  above today's ceiling rounded down to the sheet's 0.01 dB step
  (:func:`~showkit.show.sheet.floor_db`); while a cue's ceiling is not known (never
  checked, stale, an error, or its lock or sound changed since the check) its gain
  may only come down.  A non-finite gain is refused (:class:`~showkit.errors.InputError`).
- **Every edit can be undone.**  Each edit first keeps the sheet as TOML text
  (:func:`~showkit.show.sheet.sheet_to_text`, at most :data:`UNDO_DEPTH` snapshots);
  :meth:`SheetEditor.undo` brings the last one back, a deleted cue with it.  What was
  known of a cue whose lock or sound the undo changed is forgotten (its gain may
  then only come down until it is checked again).
- **Every edit is saved at once** (``autosave``) with the cue sheet's safe save
  (:func:`~showkit.show.sheet.save_sheet`: temporary file, fsync, rename, ``.bak``
  kept); an edit that would make a sheet the reader refuses is undone and raised.
"""

from __future__ import annotations

import math
import os
from dataclasses import dataclass, replace
from pathlib import Path

from showkit.errors import InputError, SheetError, ShowkitError
from showkit.show.sheet import (AudioSource, Cue, GlideSource, PauseSource, Sheet, ToneSource,
                                floor_db, parse_sheet, save_sheet, sheet_to_text)
from showkit.show.status import SILENT_MESSAGE, CueStatus
from showkit.units import format_time as _clock  # the one m:ss.s formatter

#: How many undo snapshots are kept.
UNDO_DEPTH = 200
#: Gain step of the gain keys, dB.
GAIN_STEP_DB = 0.5
#: A new cue starts this far below its ceiling, dB: a passage added from a track, and a cue whose gain
#: is above the ceiling of its first lock (a tone, a glide, a cue written by hand): start low.
PASSAGE_MARGIN_DB = 3.0
#: Check statuses under which a cue's ceiling is not known (its gain may only come down).
UNKNOWN_CEILING = (CueStatus.STALE, CueStatus.ERROR)


@dataclass(frozen=True)
class GainChange:
    """What a gain edit did: the gain now (dB), why it stopped where it did (or ''), and whether it stopped."""

    gain_db: float
    note: str
    stopped: bool = False


class SheetEditor:
    """One open cue sheet with undo and autosave; gain edits stop at the ceiling.

    Parameters
    ----------
    sheet : Sheet
        With a ``path`` when ``autosave`` is on (every edit is written there).
    autosave : bool
        Save after every edit (default).  Off, :meth:`save` writes when asked.
    """

    def __init__(self, sheet: Sheet, autosave: bool = True):
        self.sheet = sheet
        self.autosave = autosave
        self.checks: dict = {}          # cue id -> CueCheck (today's ceiling and status)
        self.modes: list = []           # the rig's modes (objects with ``n``), to refuse a mode it lacks
        self._undo: list[str] = []
        self.saved_text = sheet_to_text(sheet)

    # ------------------------------------------------------------ gain: stops at the ceiling
    def ceiling_of(self, cue_id: str) -> float | None:
        """Today's ceiling of a cue in dB, or None while it is not known."""
        check = self.checks.get(cue_id)
        if check is None or check.status in UNKNOWN_CEILING:
            return None
        return check.ceiling_db

    def set_gain(self, cue_id: str, gain_db: float) -> GainChange:
        """Set a cue's gain (dB), never above today's ceiling; says why when it stops.

        The gain is rounded to 0.01 dB.  Raises InputError for a non-finite gain.
        """
        cue = self.sheet.cue(cue_id)
        gain = float(gain_db)
        if not math.isfinite(gain):
            raise InputError(f"a gain must be a finite number of dB, not {gain_db!r}", "gain",
                             "type a number such as -24.5")
        gain = round(gain, 2)
        check = self.checks.get(cue_id)
        ceiling = self.ceiling_of(cue_id)
        note, stopped = "", False
        if ceiling is None:
            if gain > cue.gain_db:
                reason = check.message if check is not None else "its ceiling is not known yet"
                return GainChange(cue.gain_db, f"{cue_id}: the gain can only come down until the cue "
                                  f"is locked ({reason}); press L to lock", True)
        else:
            top = floor_db(ceiling)
            if gain > top:
                gain, stopped = top, True
                if check is not None and check.silent:
                    why = "the cap on the gain of a cue that plays nothing"
                elif check is not None and check.limited_by == "full_scale":
                    why = "above it the samples would clip (past 0 dBFS)"
                else:
                    why = "above it hole pressure would fall below the safe line"
                note = f"{cue_id}: stopped at the ceiling {top:+.2f} dB -- {why}"
        if gain == cue.gain_db:
            return GainChange(gain, note, stopped)
        self._push()
        self.sheet.replace_cue(cue_id, gain_db=gain)
        self._refresh_check_gain(cue_id)
        self._autosave()
        return GainChange(gain, note, stopped)

    def nudge_gain(self, cue_id: str, step_db: float) -> GainChange:
        """Move a cue's gain by ``step_db`` dB (up stops at the ceiling, as :meth:`set_gain`)."""
        return self.set_gain(cue_id, self.sheet.cue(cue_id).gain_db + step_db)

    def apply_locks(self, cues: list[Cue]) -> list[str]:
        """Put fresh locks (from :func:`showkit.show.lock.lock_cue`) on cues whose sound did not
        change meanwhile; a gain above its new ceiling is brought down to it, or, on a cue's first
        lock, to :data:`PASSAGE_MARGIN_DB` below it (a new cue starts low).  Returns the notes.

        What was known of a re-locked cue today is forgotten until it is checked again, so
        no gain edit can go by the old ceiling meanwhile.
        """
        notes = []
        changed = False
        for new in cues:
            try:
                old = self.sheet.cue(new.id)
            except SheetError:
                continue
            if _sound(old) != _sound(new):
                continue  # edited while locking: the next lock will catch it
            gain = old.gain_db
            if gain > new.lock.ceiling_db and old.lock is None:
                gain = floor_db(new.lock.ceiling_db - PASSAGE_MARGIN_DB)
                notes.append(f"{new.id}: gain set {PASSAGE_MARGIN_DB:g} dB under its first ceiling, "
                             f"{gain:+.2f} dB (start low)")
            elif gain > new.lock.ceiling_db:
                gain = floor_db(new.lock.ceiling_db)
                notes.append(f"{new.id}: gain brought down to its ceiling {gain:+.2f} dB")
            if not changed:
                self._push()
                changed = True
            self.sheet.replace_cue(new.id, lock=new.lock, gain_db=gain)
            if old.lock != new.lock:
                self.checks.pop(new.id, None)
        if changed:
            self._autosave()
        return notes

    def accept_checks(self, checks: dict, sheet_text: str) -> dict:
        """Take the checks made on a snapshot (``sheet_text``) of the sheet; returns those taken.

        A check is taken only for a cue whose sound and lock are still those of the
        snapshot (an edit since then leaves its ceiling unknown until checked again);
        its gain and headroom follow the cue's gain now.
        """
        if sheet_text == sheet_to_text(self.sheet):
            then = {c.id: c for c in self.sheet.cues}
        else:
            then = {c.id: c for c in parse_sheet(sheet_text, str(self.sheet.path)).cues}
        now = {c.id: c for c in self.sheet.cues}
        taken = {}
        for cid, check in checks.items():
            old, cue = then.get(cid), now.get(cid)
            if old is None or cue is None or _sound(old) != _sound(cue) or old.lock != cue.lock:
                continue
            taken[cid] = check
            self.checks[cid] = check
            self._refresh_check_gain(cid)
        return taken

    # ------------------------------------------------------------ other edits
    def edit_cue(self, cue_id: str, **changes) -> Cue:
        """Change label, fades, then or notes (a changed fade makes the lock stale: the check is forgotten)."""
        if "gain_db" in changes:
            raise InputError("a gain is changed with set_gain (it stops at the ceiling)", "gain_db",
                             "use SheetEditor.set_gain")
        cue = self.sheet.cue(cue_id)
        new = replace(cue, **changes)
        if new == cue:
            return cue
        self._push()
        self.sheet.cues[self.sheet.index(cue_id)] = new
        self._refuse_unreadable()
        if _sound(cue) != _sound(new) or cue.lock != new.lock:
            self.checks.pop(cue_id, None)
        self._autosave()
        return new

    def move(self, cue_id: str, delta: int) -> int:
        """Move a cue ``delta`` places (clamped to the sheet); returns its new index."""
        i = self.sheet.index(cue_id)
        j = max(0, min(len(self.sheet.cues) - 1, i + delta))
        if i == j:
            return i
        self._push()
        cue = self.sheet.cues.pop(i)
        self.sheet.cues.insert(j, cue)
        self._autosave()
        return j

    def delete(self, cue_id: str) -> Cue:
        """Delete a cue (:meth:`undo` brings it back); returns it."""
        i = self.sheet.index(cue_id)
        self._push()
        cue = self.sheet.cues.pop(i)
        self.checks.pop(cue_id, None)
        self._autosave()
        return cue

    def add(self, cue: Cue, after: str | None = None) -> Cue:
        """Insert a cue after the cue ``after`` (at the end for None); refused if the sheet would be."""
        self._push()
        at = len(self.sheet.cues) if after is None else self.sheet.index(after) + 1
        self.sheet.cues.insert(at, cue)
        self._refuse_unreadable()
        self._autosave()
        return cue

    def add_tone(self, mode: int, duration_s: float = 10.0, gain_db: float = -40.0,
                 after: str | None = None) -> Cue:
        """A steady tone on a mode of the rig (duration in s, gain in dB)."""
        self._check_mode(mode)
        cue = Cue(id=self.sheet.new_id(f"mode-{mode}"), source=ToneSource(float(duration_s), mode=int(mode)),
                  label=f"Mode {mode} tone", gain_db=gain_db, fade_in_s=1.0, fade_out_s=1.0)
        return self.add(cue, after)

    def add_glide(self, from_mode: int, to_mode: int, duration_s: float = 15.0, gain_db: float = -40.0,
                  after: str | None = None) -> Cue:
        """A glide from one mode of the rig to another (duration in s, gain in dB)."""
        self._check_mode(from_mode)
        self._check_mode(to_mode)
        cue = Cue(id=self.sheet.new_id("glide"),
                  source=GlideSource(float(duration_s), from_mode=int(from_mode), to_mode=int(to_mode)),
                  label=f"Glide from mode {from_mode} to mode {to_mode}", gain_db=gain_db,
                  fade_in_s=1.0, fade_out_s=1.0)
        return self.add(cue, after)

    def add_pause(self, duration_s: float = 20.0, after: str | None = None) -> Cue:
        """A silent pause (a talk), ``duration_s`` long."""
        cue = Cue(id=self.sheet.new_id("talk"), source=PauseSource(float(duration_s)),
                  label="Talk", gain_db=0.0)
        return self.add(cue, after)

    def add_passage(self, track: str | Path, start_s: float, end_s: float, ceiling_db: float | None,
                    label: str = "", after: str | None = None) -> Cue:
        """A passage of a track (``start_s`` to ``end_s``) as a cue, :data:`PASSAGE_MARGIN_DB` below
        its ceiling (``ceiling_db``, dB; -40 dB when not known)."""
        gain = -40.0 if ceiling_db is None or not math.isfinite(ceiling_db) else \
            floor_db(ceiling_db - PASSAGE_MARGIN_DB)
        stem = Path(track).stem.replace("_", "-")
        fade = min(1.0, 0.1 * (end_s - start_s))
        cue = Cue(id=self.sheet.new_id(stem), source=AudioSource(self.audio_reference(track),
                                                                 round(start_s, 2), floor_db(end_s)),  # end rounded down to 0.01 s: never past the track
                  label=label or f"{Path(track).stem.replace('_', ' ').title()} "
                                 f"{_clock(start_s)}-{_clock(end_s)}",
                  gain_db=gain, fade_in_s=round(fade, 2), fade_out_s=round(fade, 2))
        return self.add(cue, after)

    def audio_reference(self, track: str | Path) -> str:
        """How the sheet names a track: ``demo:NAME`` for demo tracks, else a path relative to the sheet."""
        from showkit.demo_files import demo_audio_folder

        p = Path(track).expanduser().resolve()
        try:
            if p.parent == demo_audio_folder().resolve():
                return f"demo:{p.name}"
        except ShowkitError:
            pass
        return relative_to(p, self.sheet.folder)

    def _check_mode(self, n: int) -> None:
        have = [m.n for m in self.modes]
        if have and int(n) not in have:
            raise InputError(f"the rig has no mode {n}", "mode",
                             f"choose a mode from {have[0]} to {have[-1]} (see the Tube view)")

    # ------------------------------------------------------------ undo and saving
    @property
    def can_undo(self) -> bool:
        return bool(self._undo)

    def undo(self) -> bool:
        """Bring back the sheet as it was before the last edit (saved); False when there is none.

        Undo never takes a lock away: a cue that had no lock then, but has one now for the
        same sound, keeps today's lock (its gain brought down to that ceiling if need be),
        so undoing past the first lock of a sheet does not leave every cue unplayable.
        """
        if not self._undo:
            return False
        before = {c.id: c for c in self.sheet.cues}
        text = self._undo.pop()
        path = self.sheet.path
        self.sheet = parse_sheet(text, str(path))
        self.sheet.path = path
        for cue in list(self.sheet.cues):
            now = before.get(cue.id)
            if cue.lock is None and now is not None and now.lock is not None and _sound(now) == _sound(cue):
                self.sheet.replace_cue(cue.id, lock=now.lock,
                                       gain_db=min(cue.gain_db, floor_db(now.lock.ceiling_db)))
        kept = {}
        for cue in self.sheet.cues:
            old = before.get(cue.id)
            if cue.id in self.checks and old is not None and _sound(old) == _sound(cue) and old.lock == cue.lock:
                kept[cue.id] = self.checks[cue.id]
        self.checks = kept
        for cid in kept:
            self._refresh_check_gain(cid)
        self._autosave()
        return True

    def save(self) -> Path:
        """Save now (safe save); returns the path."""
        self._write()
        return self.sheet.path

    def copy(self, text: str | None = None) -> Sheet:
        """A separate copy of the sheet (or of a snapshot ``text`` of it), for work in another thread."""
        sheet = parse_sheet(text or sheet_to_text(self.sheet), str(self.sheet.path))
        sheet.path = self.sheet.path
        return sheet

    def _push(self) -> None:
        self._undo.append(sheet_to_text(self.sheet))
        del self._undo[:-UNDO_DEPTH]

    def _refuse_unreadable(self) -> None:
        """Undo the edit just made and raise when the sheet it makes would be refused by the reader."""
        try:
            parse_sheet(sheet_to_text(self.sheet), str(self.sheet.path))
        except ShowkitError:
            self.undo()
            raise

    def _autosave(self) -> None:
        if self.autosave:
            self._write()

    def _write(self) -> None:
        text = sheet_to_text(self.sheet)
        if text != self.saved_text:
            save_sheet(self.sheet)
            self.saved_text = text

    def _refresh_check_gain(self, cue_id: str) -> None:
        """After a gain change, the headroom follows without checking the sound again."""
        check = self.checks.get(cue_id)
        if check is None or check.ceiling_db is None:
            return
        gain = self.sheet.cue(cue_id).gain_db
        if gain == check.gain_db:
            return
        head = check.ceiling_db - gain
        status = CueStatus.OVER if head < -1e-9 else CueStatus.OK
        if check.status in UNKNOWN_CEILING:
            status = check.status
        self.checks[cue_id] = replace(check, gain_db=gain, headroom_db=head, status=status,
                                      message=check.message if status in UNKNOWN_CEILING
                                      else SILENT_MESSAGE if status == CueStatus.OK and check.plays_nothing
                                      else f"{head:.1f} dB below the ceiling" if status == CueStatus.OK
                                      else f"gain is {-head:.2f} dB above today's ceiling")


def relative_to(path: Path, folder: Path) -> str:
    """``path`` as a sheet in ``folder`` names it: relative (``../x.flac`` allowed), or
    absolute when no relative path exists (another drive)."""
    p = Path(path).expanduser().resolve()
    try:
        return Path(os.path.relpath(p, Path(folder).expanduser().resolve())).as_posix()
    except ValueError:  # another drive (Windows)
        return str(p)


def _sound(cue: Cue):
    """What a lock depends on in a cue (the source and the fades)."""
    return (cue.source, cue.fade_in_s, cue.fade_out_s)
