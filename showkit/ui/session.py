"""The open show in the terminal UI: sheet, rig, today's conditions, undo, autosave.

The UI holds no physics and no analysis: this module calls the same functions
as the command line (:mod:`showkit.show.sheet`, :mod:`showkit.show.lock`,
:mod:`showkit.show.render`, :mod:`showkit.analysis.pressure`,
:mod:`showkit.physics.modes`).  Methods named ``compute_*`` or ``*_job`` are
slow and run in Textual worker threads; they read a snapshot and return a
result that the UI applies on its own thread with the ``apply_*`` methods.

Every change to the sheet takes an undo snapshot (the sheet as TOML text,
:func:`~showkit.show.sheet.sheet_to_text`) and is saved at once with the safe
save of the cue-sheet module (temporary file, fsync, rename, ``.bak`` kept).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path

from showkit.errors import AudioError, InputError, SheetError, ShowkitError
from showkit.show.sheet import (AudioSource, Cue, GlideSource, PauseSource, Sheet, ToneSource,
                                load_sheet, parse_sheet, save_sheet, sheet_to_text)
from showkit.units import format_time as _clock  # the one m:ss.s formatter

#: How many undo snapshots are kept.
UNDO_DEPTH = 200
#: Gain step of the gain keys, dB (fine step: one tenth).
GAIN_STEP_DB = 0.5
#: A passage added from the Track view is set this far below its ceiling, dB.
PASSAGE_MARGIN_DB = 3.0
#: Length of the steady tone used to predict a mode's flame row, s.
PREVIEW_TONE_S = 1.2


# ---------------------------------------------------------------- tracks
@dataclass
class TrackAnalysis:
    """What the Track view draws for one track (numbers from the analysis layer).

    ``height``/``air_in`` are the flame frames (frames x holes) of the whole
    track at its ceiling (:func:`showkit.analysis.pressure.passage_report`);
    ``map_energy`` (modes x map frames) is the scan's map for the modes in
    ``map_modes``: each mode's strength (0 to 1, the share of the band's
    sustained sound on it) where the mode is hit, 0 elsewhere
    (:func:`showkit.analysis.scan.map_data`, the same data as ``scan --map``);
    ``passages`` are the scan's, best first.
    """

    path: Path
    duration_s: float
    transpose: int
    score: float
    suggestion: int
    ceiling_db: float
    passages: list
    height: object
    air_in: object
    contrast_frame: object
    frame_rate_hz: float
    height_lo: float
    height_hi: float
    map_modes: list
    map_energy: object
    map_times_s: object
    frame_notes: list
    note: str = ""

    def frame_at(self, t_s: float) -> int:
        return int(min(self.height.shape[0] - 1, max(0, round(t_s * self.frame_rate_hz))))

    def notes_at(self, t_s: float) -> str:
        if not self.frame_notes:
            return ""
        if self.map_times_s is None or len(self.map_times_s) == 0:
            return ""
        import numpy as np

        k = int(np.clip(np.searchsorted(self.map_times_s, t_s), 0, len(self.frame_notes) - 1))
        return self.frame_notes[k]


class TrackWork:
    """The Track view's work on a :class:`Session`: finding, analysing and auditioning tracks."""

    def track_choices(self) -> list[str]:
        """Tracks to offer (as text): those the sheet uses, then the demo tracks.

        Cheap: nothing is decoded or synthesized here (the UI thread calls it).
        """
        out = []
        for cue in self.sheet.cues:
            if isinstance(cue.source, AudioSource) and cue.source.path not in out:
                out.append(cue.source.path)
        from showkit.show.sheet import DEMO_AUDIO_PREFIX

        for name in DEMO_TRACKS:
            if DEMO_AUDIO_PREFIX + name not in out:
                out.append(DEMO_AUDIO_PREFIX + name)
        return out

    def resolve_track(self, text) -> Path:
        """The file a track name means: ``demo:NAME`` (made if need be: slow the first
        time, so call it in a worker), a path relative to the sheet, or a path."""
        from showkit.show.sheet import DEMO_AUDIO_PREFIX

        t = str(text).strip()
        if t in DEMO_TRACKS or Path(t).stem in [Path(n).stem for n in DEMO_TRACKS] and not Path(t).exists():
            t = DEMO_AUDIO_PREFIX + (t if t.endswith(".flac") else t + ".flac")
        if t.startswith(DEMO_AUDIO_PREFIX):
            p = self.sheet.audio_path(AudioSource(t))
        else:
            p = Path(t).expanduser()
            if not p.is_absolute() and not p.exists():
                p = self.sheet.folder / p
        if not p.is_file():
            raise AudioError("no such audio file", str(p), "give the path of a FLAC, WAV or OGG file")
        return p.resolve()

    def track_job(self, path: Path, transpose: int = 0, progress=None) -> TrackAnalysis:
        """Analyse a track for the Track view (worker thread).

        The passages, score and suggested transposition are the scan's
        (:func:`showkit.analysis.scan.scan_paths`, cached); the flame frames are
        :func:`~showkit.analysis.pressure.passage_report` of the whole track at
        its ceiling; the map and the score at a tried transposition come from
        :func:`_track_frames`.
        """
        import numpy as np

        from showkit.analysis.pressure import passage_report
        from showkit.analysis.scan import scan_paths

        rig = self.rig
        steps = 4
        path = self.resolve_track(path)

        def tick(k):
            if progress:
                progress(k, steps, None)

        tick(0)
        scan = scan_paths(rig, [path], jobs=1, use_cache=True)[0]
        if scan.get("error"):
            raise AudioError(scan["error"], str(path), "choose another file")
        tick(1)
        report = passage_report(rig, path)
        tick(2)
        frames_info = _track_frames(rig, path, transpose * 100.0)
        tick(3)
        frames = report.frames
        height, air = frames.height, frames.air_in
        suggestion = int(round(scan.get("transpose_semitones") or 0))
        score = scan["score"] if transpose == 0 else frames_info["score"]
        tick(4)
        return TrackAnalysis(
            path=Path(path), duration_s=float(scan["duration_s"]), transpose=transpose,
            score=float(score), suggestion=suggestion, ceiling_db=report.ceiling_db,
            passages=sorted(scan["passages"], key=lambda p: -p["score"]), height=height, air_in=air,
            contrast_frame=report.contrast_per_frame, frame_rate_hz=float(frames.frame_rate_hz),
            height_lo=float(np.min(height)) if height.size else 0.0,
            height_hi=float(np.max(height)) if height.size else 1.0,
            map_modes=frames_info["map_modes"], map_energy=frames_info["map_energy"],
            map_times_s=frames_info["times_s"], frame_notes=frames_info["notes"],
            note=scan.get("note", ""))

    def passage_job(self, path: Path, start_s: float, end_s: float):
        from showkit.analysis.pressure import passage_report

        return passage_report(self.rig, path, start_s, end_s)

    def passage_audition_job(self, path: Path, start_s: float, end_s: float):
        """The passage as a locked cue at its safe gain, rendered and verified."""
        from showkit.show.lock import lock_cue
        from showkit.show.render import render_cue

        sheet = Sheet(title="audition", rig=self.sheet.rig, path=self.sheet.path)
        cue = Cue(id="audition", source=AudioSource(str(path), start_s, end_s), gain_db=-60.0,
                  fade_in_s=min(0.5, 0.1 * (end_s - start_s)), fade_out_s=min(0.5, 0.1 * (end_s - start_s)))
        rig = self.rig
        locked, _ = lock_cue(sheet, rig, cue)
        from showkit.show.lock import safe_gain

        locked = replace(locked, gain_db=safe_gain(locked.lock.ceiling_db - PASSAGE_MARGIN_DB))
        sheet.cues.append(locked)
        return render_cue(sheet, rig, locked)



#: The demo tracks (``demo:NAME`` in a sheet; made by showkit.demo.synth).
DEMO_TRACKS = ("ember_steps.flac", "lantern_drift.flac", "kettle_parade.flac", "three_rooms.flac")

#: Most rows the time x mode map draws.
MAP_ROWS = 10


def _track_frames(rig, path, shift_cents: float) -> dict:
    """The time x mode map and the score at a transposition (the scan's own analysis).

    The rows drawn are the modes hit most (at most :data:`MAP_ROWS`), in
    frequency order; each row is the map's strength where the mode is hit.
    """
    import numpy as np

    from showkit.analysis.scan import track_frames

    got = track_frames(rig, path, shift_cents)
    m = got["map"]
    strength = np.asarray(m["strength"], dtype=float).reshape(len(m["modes"]), -1)
    hit = np.asarray(m["hit"], dtype=bool).reshape(strength.shape)
    drawn = np.where(hit, strength, 0.0)
    count = hit.sum(axis=1)
    rows = np.nonzero(count > 0)[0]
    if rows.size > MAP_ROWS:
        rows = np.sort(rows[np.argsort(-count[rows], kind="stable")[:MAP_ROWS]])
    return {"score": got["score"], "map_modes": [int(m["modes"][k]["n"]) for k in rows],
            "map_energy": drawn[rows], "times_s": np.asarray(m["times_s"], dtype=float),
            "notes": got["notes"]}


@dataclass(frozen=True)
class GainChange:
    """What a gain edit did: the gain now, and why it stopped where it did (or '')."""

    gain_db: float
    note: str
    stopped: bool = False


class Session(TrackWork):
    """The sheet being edited and the rig it is played on today.

    Parameters
    ----------
    sheet : Sheet
        With a ``path`` (autosave writes there).
    rig : Rig, optional
        The rig to use; default: the one the sheet names.
    """

    def __init__(self, sheet: Sheet, rig=None):
        self.sheet = sheet
        self._undo: list[str] = []
        self._base_rig = rig
        self.static_pa: float | None = None      # today's manometer reading (None: the rig file's)
        self.temperature_k: float | None = None  # today's gas temperature (None: the rig file's)
        self.checks: dict = {}                   # cue id -> CueCheck
        self.modes: list = []
        self.saved_text = sheet_to_text(sheet)
        self.last_message = ""
        self.device = None                       # audio output: None (system default), index or name

    # ------------------------------------------------------------ opening
    @classmethod
    def open_sheet(cls, path: str | Path) -> "Session":
        return cls(load_sheet(path))

    @classmethod
    def for_track(cls, track: str | Path, rig_path: str | Path | None, sheet_path: Path) -> "Session":
        """A session with a new (or existing) sheet for one track, on a given rig."""
        sheet_path = Path(sheet_path)
        if sheet_path.exists():
            return cls.open_sheet(sheet_path)
        rig = "demo" if rig_path is None else _relative_to(Path(rig_path).expanduser(), sheet_path.parent)
        sheet = Sheet(title=f"Show with {Path(track).stem}", rig=rig, cues=[], path=sheet_path)
        sheet_path.parent.mkdir(parents=True, exist_ok=True)
        save_sheet(sheet)
        return cls(sheet)

    # ------------------------------------------------------------ the rig
    def base_rig(self):
        if self._base_rig is None:
            from showkit.show.lock import sheet_rig

            self._base_rig = sheet_rig(self.sheet)
        return self._base_rig

    @property
    def rig_loaded(self) -> bool:
        return self._base_rig is not None

    @property
    def rig(self):
        """The sheet's rig with today's static pressure and gas temperature."""
        return self.base_rig().with_conditions(static_pa=self.static_pa, temperature_k=self.temperature_k)

    def reload_rig(self) -> None:
        """Read the rig file again (after the measurement view wrote into it)."""
        self._base_rig = None
        self.checks = {}

    @property
    def conditions(self):
        """Today's conditions (:class:`showkit.conditions.Conditions`): the UI's one current set."""
        return self.rig.conditions

    def set_conditions(self, static=None, temperature=None) -> tuple[bool, bool]:
        """The UI's one door for today's conditions; returns (static changed, temperature changed).

        ``static`` (a number in Pa or text with a unit, e.g. ``"18 Pa"``) and
        ``temperature`` (a number in K or text, e.g. ``"18 C"``) go through
        :func:`showkit.conditions.make_conditions` together, with the limits every
        other door uses; ``None`` keeps today's value.  Either is refused (an
        :class:`~showkit.errors.InputError` line) before anything changes.  A value
        equal to the rig file's (as the dialogs show it) is the rig file's.
        """
        from showkit.conditions import make_conditions
        from showkit.show.preshow import SAME_TEMPERATURE_K

        base = self.base_rig()
        new = make_conditions(static, temperature, None, base=self.rig.conditions,
                              where={"static": "static pressure", "temperature": "gas temperature"})
        static_pa = None if abs(new.static_pa - base.static_pa) < 1e-9 else new.static_pa
        temperature_k = (None if abs(new.temperature_k - base.temperature_k) <= SAME_TEMPERATURE_K
                         else new.temperature_k)
        changed = (static_pa != self.static_pa, temperature_k != self.temperature_k)
        self.static_pa, self.temperature_k = static_pa, temperature_k
        return changed

    # ------------------------------------------------------------ slow work (worker threads)
    def compute_modes(self, rig=None) -> list:
        from showkit.physics.modes import find_modes

        return find_modes((rig or self.rig).model)

    def compute_checks(self, sheet_text: str | None = None, rig=None) -> dict:
        """CueCheck for every cue of a snapshot of the sheet, for today's conditions.

        The rule of the pre-show check (:func:`showkit.show.preshow.cue_for_today`):
        a lock is stale only against the rig file; today's static pressure re-derives
        the ceilings, and a gas temperature of today locks the valid cues again in
        memory (tone and glide cues on today's modes), so it never makes a cue stale.
        """
        from showkit.show.preshow import cue_for_today

        sheet = self._copy(sheet_text)
        rig = rig or self.rig
        base = self.base_rig()
        return {c.id: cue_for_today(sheet, base, rig, c)[1] for c in sheet.cues}

    def lock_job(self, ids: list[str] | None = None, progress=None, sheet_text: str | None = None,
                 rig=None) -> list[Cue]:
        """Locked copies of the cues (all stale/unlocked ones when ``ids`` is None)."""
        from showkit.show.lock import lock_cue

        sheet = self._copy(sheet_text)
        rig = rig or self.rig
        # a lock is written for the rig file's gas (today's static pressure is recorded in it and
        # re-derived exactly): a temperature typed in today never leaves a lock stale tomorrow
        rig = self.base_rig().with_conditions(static_pa=rig.static_pa, reserve=rig.reserve)
        if ids is None:
            ids = [c.id for c in sheet.cues
                   if self.checks.get(c.id) is None or self.checks[c.id].status in ("stale", "error")]
        targets = [c for c in sheet.cues if c.id in ids]
        out = []
        for k, cue in enumerate(targets):
            if progress:
                progress(k, len(targets), cue.id)
            try:
                new, _ = lock_cue(sheet, rig, cue)
            except ShowkitError as exc:
                self.last_message = exc.line()
                continue
            out.append(new)
        if progress:
            progress(len(targets), len(targets), None)
        return out

    def mode_flames_job(self, mode, rig=None):
        """The predicted flame row of a steady tone on ``mode`` at its safe level.

        A faded tone at the mode frequency goes through the same pressure model
        as every cue (:func:`showkit.analysis.pressure.signal_report`); the
        middle frame (steady state) of its flame frames is returned with the
        ceiling: ``(height per hole, air drawn in per hole, ceiling_db)``.
        """
        from showkit.analysis.pressure import signal_report
        from showkit.show.sources import TONE_RATE_HZ, fade, tone

        rig = rig or self.rig
        x = fade(tone(mode.frequency_hz, PREVIEW_TONE_S), TONE_RATE_HZ, 0.2, 0.2)
        report = signal_report(rig, x, TONE_RATE_HZ, flames=True)
        frames = report.frames
        # steady state: the frames of the middle third of the tone (after the fade-in,
        # before the fade-out), their mean height and any air drawn in
        fr = float(frames.frame_rate_hz)
        a = int(round(PREVIEW_TONE_S / 3 * fr))
        b = max(a + 1, int(round(2 * PREVIEW_TONE_S / 3 * fr)))
        return (frames.height[a:b].mean(axis=0), frames.air_in[a:b].max(axis=0), report.ceiling_db)

    def render_job(self, cue_id: str):
        """The cue rendered at its gain and verified (for the audition)."""
        from showkit.show.preshow import cue_for_today
        from showkit.show.render import render_cue

        sheet = self._copy()
        rig = self.rig
        cue, _ = cue_for_today(sheet, self.base_rig(), rig, sheet.cue(cue_id))
        return render_cue(sheet, rig, cue)

    # ------------------------------------------------------------ applying results (UI thread)
    def apply_locks(self, cues: list[Cue]) -> list[str]:
        """Put fresh locks on cues whose sound did not change meanwhile; clamp gains."""
        from showkit.show.lock import safe_gain

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
            if gain > new.lock.ceiling_db:
                gain = safe_gain(new.lock.ceiling_db)
                notes.append(f"{new.id}: gain brought down to its ceiling {gain:+.2f} dB")
            if not changed:
                self._push()
                changed = True
            self.sheet.replace_cue(new.id, lock=new.lock, gain_db=gain)
        if changed:
            self._save()
        return notes

    # ------------------------------------------------------------ edits (UI thread, autosaved)
    def ceiling_of(self, cue_id: str) -> float | None:
        check = self.checks.get(cue_id)
        return None if check is None else check.ceiling_db

    def set_gain(self, cue_id: str, gain_db: float) -> GainChange:
        """Set a cue's gain, never above today's ceiling; says why when it stops."""
        from showkit.show.lock import safe_gain

        cue = self.sheet.cue(cue_id)
        check = self.checks.get(cue_id)
        gain = round(float(gain_db), 2)
        note, stopped = "", False
        if check is None or check.status in ("stale", "error") or check.ceiling_db is None:
            if gain > cue.gain_db:
                reason = check.message if check is not None else "its ceiling is not known yet"
                return GainChange(cue.gain_db, f"{cue_id}: the gain can only come down until the cue "
                                  f"is locked ({reason}); press L to lock", True)
        else:
            top = safe_gain(check.ceiling_db)
            if gain > top:
                gain, stopped = top, True
                note = (f"{cue_id}: stopped at the ceiling {top:+.2f} dB -- above it hole "
                        f"pressure would fall below the safe line ({check.limited_by or 'pressure'})")
        if gain == cue.gain_db:
            return GainChange(gain, note, stopped)
        self._push()
        self.sheet.replace_cue(cue_id, gain_db=gain)
        self._refresh_check_gain(cue_id)
        self._save()
        return GainChange(gain, note, stopped)

    def nudge_gain(self, cue_id: str, step_db: float) -> GainChange:
        return self.set_gain(cue_id, self.sheet.cue(cue_id).gain_db + step_db)

    def edit_cue(self, cue_id: str, **changes) -> Cue:
        """Change label, fades, then or notes (a changed fade makes the lock stale)."""
        cue = self.sheet.cue(cue_id)
        new = replace(cue, **changes)
        if new == cue:
            return cue
        from showkit.show.sheet import parse_sheet as _check

        self._push()
        i = self.sheet.index(cue_id)
        self.sheet.cues[i] = new
        try:
            _check(sheet_to_text(self.sheet), str(self.sheet.path))
        except ShowkitError:
            self.undo()
            raise
        if _sound(cue) != _sound(new):
            self.checks.pop(cue_id, None)
        self._save()
        return new

    def move(self, cue_id: str, delta: int) -> int:
        i = self.sheet.index(cue_id)
        j = max(0, min(len(self.sheet.cues) - 1, i + delta))
        if i == j:
            return i
        self._push()
        cue = self.sheet.cues.pop(i)
        self.sheet.cues.insert(j, cue)
        self._save()
        return j

    def delete(self, cue_id: str) -> None:
        self._push()
        self.sheet.cues.pop(self.sheet.index(cue_id))
        self.checks.pop(cue_id, None)
        self._save()

    def _add(self, cue: Cue, after: str | None) -> Cue:
        self._push()
        at = len(self.sheet.cues) if after is None else self.sheet.index(after) + 1
        self.sheet.cues.insert(at, cue)
        try:
            parse_sheet(sheet_to_text(self.sheet), str(self.sheet.path))
        except ShowkitError:
            self.undo()
            raise
        self._save()
        return cue

    def add_tone(self, mode: int, duration_s: float = 10.0, gain_db: float = -40.0,
                 after: str | None = None) -> Cue:
        self._check_mode(mode)
        cue = Cue(id=self.sheet.new_id(f"mode-{mode}"), source=ToneSource(float(duration_s), mode=int(mode)),
                  label=f"Mode {mode} tone", gain_db=gain_db, fade_in_s=1.0, fade_out_s=1.0)
        return self._add(cue, after)

    def add_glide(self, from_mode: int, to_mode: int, duration_s: float = 15.0, gain_db: float = -40.0,
                  after: str | None = None) -> Cue:
        self._check_mode(from_mode)
        self._check_mode(to_mode)
        cue = Cue(id=self.sheet.new_id("glide"),
                  source=GlideSource(float(duration_s), from_mode=int(from_mode), to_mode=int(to_mode)),
                  label=f"Glide from mode {from_mode} to mode {to_mode}", gain_db=gain_db,
                  fade_in_s=1.0, fade_out_s=1.0)
        return self._add(cue, after)

    def _check_mode(self, n: int) -> None:
        have = [m.n for m in self.modes]
        if have and int(n) not in have:
            raise InputError(f"the rig has no mode {n}", "mode",
                             f"choose a mode from {have[0]} to {have[-1]} (see the Tube view)")

    def add_pause(self, duration_s: float = 20.0, after: str | None = None) -> Cue:
        cue = Cue(id=self.sheet.new_id("talk"), source=PauseSource(float(duration_s)),
                  label="Talk", gain_db=0.0)
        return self._add(cue, after)

    def add_passage(self, track: str | Path, start_s: float, end_s: float, ceiling_db: float | None,
                    label: str = "", after: str | None = None) -> Cue:
        """A passage of a track as a cue, at :data:`PASSAGE_MARGIN_DB` below its ceiling."""
        from showkit.show.lock import safe_gain

        gain = -40.0 if ceiling_db is None or not math.isfinite(ceiling_db) else \
            safe_gain(ceiling_db - PASSAGE_MARGIN_DB)
        stem = Path(track).stem.replace("_", "-")
        fade = min(1.0, 0.1 * (end_s - start_s))
        cue = Cue(id=self.sheet.new_id(stem), source=AudioSource(self.audio_reference(track),
                                                                 round(start_s, 2), round(end_s, 2)),
                  label=label or f"{Path(track).stem.replace('_', ' ').title()} "
                                 f"{_clock(start_s)}-{_clock(end_s)}",
                  gain_db=gain, fade_in_s=round(fade, 2), fade_out_s=round(fade, 2))
        return self._add(cue, after)

    def audio_reference(self, track: str | Path) -> str:
        """How the sheet names a track: ``demo:NAME`` for demo tracks, else a path."""
        from showkit.demo_files import demo_audio_folder

        p = Path(track).expanduser().resolve()
        try:
            if p.parent == demo_audio_folder().resolve():
                return f"demo:{p.name}"
        except ShowkitError:
            pass
        return _relative_to(p, self.sheet.folder)

    # ------------------------------------------------------------ undo and saving
    def _push(self) -> None:
        self._undo.append(sheet_to_text(self.sheet))
        del self._undo[:-UNDO_DEPTH]

    def undo(self) -> bool:
        if not self._undo:
            return False
        text = self._undo.pop()
        path = self.sheet.path
        self.sheet = parse_sheet(text, str(path))
        self.sheet.path = path
        self.checks = {k: v for k, v in self.checks.items() if k in {c.id for c in self.sheet.cues}}
        self._save()
        return True

    def _save(self) -> None:
        text = sheet_to_text(self.sheet)
        if text != self.saved_text:
            save_sheet(self.sheet)
            self.saved_text = text

    def save(self) -> Path:
        """Save now (safe save); returns the path."""
        self._save()
        return self.sheet.path

    # ------------------------------------------------------------ helpers
    def _copy(self, text: str | None = None) -> Sheet:
        sheet = parse_sheet(text or sheet_to_text(self.sheet), str(self.sheet.path))
        sheet.path = self.sheet.path
        return sheet

    def _refresh_check_gain(self, cue_id: str) -> None:
        """After a gain change, the headroom follows without re-checking the sound."""
        check = self.checks.get(cue_id)
        if check is None or check.ceiling_db is None:
            return
        gain = self.sheet.cue(cue_id).gain_db
        head = check.ceiling_db - gain
        status = "over" if head < -1e-9 else "ok"
        self.checks[cue_id] = replace(check, gain_db=gain, headroom_db=head, status=status,
                                      message=f"{head:.1f} dB below the ceiling" if status == "ok"
                                      else f"gain is {-head:.2f} dB above today's ceiling")


def _relative_to(path: Path, folder: Path) -> str:
    """``path`` as the sheet names it: relative to the sheet's ``folder`` (``../x.flac``
    allowed), or absolute when no relative path exists (another drive)."""
    import os

    p = Path(path).expanduser().resolve()
    try:
        return Path(os.path.relpath(p, Path(folder).expanduser().resolve())).as_posix()
    except ValueError:  # another drive (Windows)
        return str(p)


def _sound(cue: Cue):
    """What a lock depends on in a cue (the source and the fades)."""
    return (cue.source, cue.fade_in_s, cue.fade_out_s)


def describe_source(cue: Cue) -> str:
    """A short text for a cue's source (for the cue list)."""
    s = cue.source
    if isinstance(s, AudioSource):
        name = s.path.removeprefix("demo:")
        end = "end" if s.end_s is None else _clock(s.end_s)
        return f"{Path(name).name} {_clock(s.start_s)}-{end}"
    if isinstance(s, ToneSource):
        what = f"mode {s.mode}" if s.mode is not None else f"{s.frequency_hz:.1f} Hz"
        return f"tone {what}, {s.duration_s:g} s"
    if isinstance(s, GlideSource):
        a = f"mode {s.from_mode}" if s.from_mode is not None else f"{s.from_frequency_hz:.0f} Hz"
        b = f"mode {s.to_mode}" if s.to_mode is not None else f"{s.to_frequency_hz:.0f} Hz"
        return f"glide {a} to {b}, {s.duration_s:g} s"
    return f"pause {s.duration_s:g} s"

