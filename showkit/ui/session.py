"""The open show in the terminal UI: the sheet being edited, its rig and today's conditions.

The UI holds no physics and no analysis: this module (with its two siblings for the
Track view, :mod:`showkit.ui.tracks`, and the Measure view, :mod:`showkit.ui.measuring`)
is where the UI calls the same functions as the command line
(:mod:`showkit.show.preshow`, :mod:`showkit.show.lock`, :mod:`showkit.show.render`,
:mod:`showkit.analysis.pressure`, :mod:`showkit.physics.modes`).  Methods named
``compute_*`` or ``*_job`` are slow and run in Textual worker threads; they read a
snapshot and return a result that the UI applies on its own thread.

The editing itself (gains that stop at the ceiling, undo, autosave) is the domain's
:class:`showkit.show.editing.SheetEditor`, which :class:`Session` extends.
"""

from __future__ import annotations

import os
from pathlib import Path

from showkit.errors import InputError, ShowkitError
from showkit.show.editing import SheetEditor, relative_to
from showkit.show.sheet import Cue, Sheet, load_sheet, save_sheet
from showkit.show.status import CueStatus

#: Length of the steady tone used to predict a mode's flame row, s.
PREVIEW_TONE_S = 1.2
#: Flame rows of the Tube view's modes kept (oldest dropped first): a few rigs' worth of modes.
MODE_FLAMES_KEPT = 64


class Session(SheetEditor):
    """The sheet being edited and the rig it is played on today.

    Parameters
    ----------
    sheet : Sheet
        With a ``path`` (autosave writes there).
    rig : Rig, optional
        The rig to use; default: the one the sheet names.
    log_path : Path, optional
        The show log (default: the user's data directory, as `showkit run`).
    """

    def __init__(self, sheet: Sheet, rig=None, log_path: Path | None = None):
        super().__init__(sheet)
        self._base_rig = rig
        self.rig_error: ShowkitError | None = None  # why the last rig read failed (None: it did not)
        self.static_pa: float | None = None      # today's manometer reading (None: the rig file's)
        self.temperature_k: float | None = None  # today's gas temperature (None: the rig file's)
        self.device = None                       # audio output: None (system default), index or name
        self.log_path = log_path
        self._show_log = None
        self._mode_flames: dict = {}             # (mode, Hz, static Pa) -> mode_flames_job's result
        from showkit.ui.tracks import TrackWork

        self.tracks = TrackWork(self)

    # ------------------------------------------------------------ opening
    @classmethod
    def open_sheet(cls, path: str | Path) -> "Session":
        return cls(load_sheet(path))

    @classmethod
    def for_track(cls, track: str | Path, rig_path: str | Path | None, sheet_path: Path) -> "Session":
        """A session with a new (or existing) sheet for one track, on a given rig."""
        sheet_path = Path(sheet_path)
        if sheet_path.exists():
            session = cls.open_sheet(sheet_path)
            named = session.sheet.rig_path()
            if rig_path is not None and (named is None or named.resolve() != Path(rig_path).expanduser().resolve()):
                # never open the show on another rig than asked without saying so
                shown = "the demo rig" if named is None else os.path.normpath(named)
                raise InputError(f"this track's show already names another rig ({shown})", str(sheet_path),
                                 "open it without --rig, edit that sheet's rig = line, or give --sheet NEW.toml "
                                 "for a show on this rig")
            return session
        rig = "demo" if rig_path is None else relative_to(Path(rig_path).expanduser(), sheet_path.parent)
        sheet = Sheet(title=f"Show with {Path(track).stem}", rig=rig, cues=[], path=sheet_path)
        sheet_path.parent.mkdir(parents=True, exist_ok=True)
        save_sheet(sheet)
        return cls(sheet)

    # ------------------------------------------------------------ the rig and today's conditions
    def base_rig(self):
        """The sheet's rig as its file says; a rig that cannot be read raises, and the error is kept
        in :attr:`rig_error` for the screens that wait for it."""
        if self._base_rig is None:
            from showkit.show.lock import sheet_rig

            try:
                self._base_rig = sheet_rig(self.sheet)
            except ShowkitError as exc:
                self.rig_error = exc
                raise
            self.rig_error = None
        return self._base_rig

    @property
    def rig_loaded(self) -> bool:
        return self._base_rig is not None

    @property
    def rig_problem(self):
        """Why the rig cannot be read (the :class:`~showkit.errors.ShowkitError`), while it is not
        loaded and its last read failed; else ``None`` (loaded, or not tried yet)."""
        return None if self._base_rig is not None else self.rig_error

    @property
    def rig(self):
        """The sheet's rig with today's static pressure and gas temperature."""
        return self.base_rig().with_conditions(static_pa=self.static_pa, temperature_k=self.temperature_k)

    def reload_rig(self) -> None:
        """Read the rig file again (after the measurement view wrote into it)."""
        self._base_rig = None
        self.checks = {}
        self._mode_flames.clear()

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
        if any(changed):
            self._mode_flames.clear()
        return changed

    def show_log(self):
        """The show log of the run view, opened at first use (raises LogError with what to do)."""
        if self._show_log is None:
            from showkit.show.showlog import ShowLog

            self._show_log = ShowLog(self.log_path)
        return self._show_log

    def close_log(self) -> None:
        if self._show_log is not None:
            self._show_log.close()

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
        from showkit.show.preshow import checks_for_today

        sheet = self.copy(sheet_text)
        return {c.id: c for c in checks_for_today(sheet, self.base_rig(), rig or self.rig)}

    def lock_job(self, ids: list[str] | None = None, progress=None, sheet_text: str | None = None,
                 rig=None) -> list[Cue]:
        """Locked copies of the cues (all stale/unlocked ones when ``ids`` is None)."""
        from showkit.show.lock import lock_cue

        sheet = self.copy(sheet_text)
        rig = rig or self.rig
        # a lock is written for the rig file's gas (today's static pressure is recorded in it and
        # re-derived exactly): a temperature typed in today never leaves a lock stale tomorrow
        rig = self.base_rig().with_conditions(static_pa=rig.static_pa, reserve=rig.reserve)
        if ids is None:
            ids = [c.id for c in sheet.cues
                   if self.checks.get(c.id) is None
                   or self.checks[c.id].status in (CueStatus.STALE, CueStatus.ERROR)]
        targets = [c for c in sheet.cues if c.id in ids]
        out = []
        for k, cue in enumerate(targets):
            if progress:
                progress(k, len(targets), cue.id)
            try:
                new, _ = lock_cue(sheet, rig, cue)
            except ShowkitError:
                continue
            out.append(new)
        if progress:
            progress(len(targets), len(targets), None)
        return out

    def cached_mode_flames(self, mode):
        """:meth:`mode_flames_job`'s result for ``mode`` on today's rig when already computed, else None."""
        return self._mode_flames.get(self._flames_key(mode))

    def _flames_key(self, mode):
        return (mode.n, round(mode.frequency_hz, 4), self.rig.static_pa)

    def mode_flames_job(self, mode, rig=None):
        """The predicted flame row of a steady tone on ``mode`` at its safe level (kept for today's rig).

        A faded tone at the mode frequency goes through the same pressure model
        as every cue (:func:`showkit.analysis.pressure.signal_report`); the
        middle frame (steady state) of its flame frames is returned with the
        ceiling: ``(height per hole, air drawn in per hole, ceiling_db)``.
        """
        from showkit.analysis.pressure import signal_report
        from showkit.analysis.signals import TONE_RATE_HZ, fade, tone

        key = self._flames_key(mode)
        rig = rig or self.rig
        x = fade(tone(mode.frequency_hz, PREVIEW_TONE_S), TONE_RATE_HZ, 0.2, 0.2)
        report = signal_report(rig, x, TONE_RATE_HZ, flames=True)
        frames = report.frames
        # steady state: the frames of the middle third of the tone (after the fade-in,
        # before the fade-out), their mean height and any air drawn in
        fr = float(frames.frame_rate_hz)
        a = int(round(PREVIEW_TONE_S / 3 * fr))
        b = max(a + 1, int(round(2 * PREVIEW_TONE_S / 3 * fr)))
        result = (frames.height[a:b].mean(axis=0), frames.air_in[a:b].max(axis=0), report.ceiling_db)
        if len(self._mode_flames) >= MODE_FLAMES_KEPT:
            self._mode_flames.pop(next(iter(self._mode_flames), None), None)  # tolerates a clear() meanwhile
        self._mode_flames[key] = result
        return result

    def cue_flames_job(self, cues, rig, progress):
        """The predicted flame frames of rendered cues (the Run view's flame row), by cue id.

        The rows of the samples as they play (0 dB: the rendered cue is at its locked
        gain), as the show book and the preview draw them.  A cue rendered by
        :meth:`preshow_job` carries its row from its verification
        (:attr:`~showkit.show.playlist.RenderedCue.flames`); any other goes through
        :func:`showkit.analysis.pressure.signal_flames`.  The result per cue is
        :func:`showkit.show.render.flame_row`'s ``(height frames, frame rate Hz, lowest, highest)``.
        """
        from showkit.analysis.pressure import frame_lag, signal_flames
        from showkit.show.render import flame_row

        out = {}
        for k, cue in enumerate(cues):
            progress(k, len(cues), cue.id)
            out[cue.id] = cue.flames if cue.flames is not None else flame_row(
                signal_flames(rig, cue.samples, cue.rate_hz, 0.0), frame_lag(rig))
        progress(len(cues), len(cues), None)
        return out

    def render_job(self, cue_id: str):
        """The cue rendered at its gain and verified (for the audition)."""
        from showkit.show.preshow import cue_for_today
        from showkit.show.render import render_cue
        from showkit.show.sources import SignalMemo

        sheet = self.copy()
        rig = self.rig
        signals = SignalMemo()  # the cue's sound built once for its check and its render
        cue, _ = cue_for_today(sheet, self.base_rig(), rig, sheet.cue(cue_id), signals=signals)
        return render_cue(sheet, rig, cue, signals)

    def measure_job(self, rec_path: Path, sweep_path: Path, progress=None):
        """A recording of the sweep analysed on the rig file's rig (:func:`showkit.ui.measuring.measure_files`)."""
        from showkit.ui.measuring import measure_files

        return measure_files(self.base_rig(), rec_path, sweep_path, progress)

    def preshow_job(self, sheet_path: Path, log, static_pa: float | None, temperature_k: float | None):
        """The pre-show check of the saved sheet (:func:`showkit.show.preshow.pre_show_check`):
        ``(rendered cues, problems)`` for today's static pressure (Pa) and gas temperature (K)
        (None: the rig file's), written to the show ``log``."""
        from showkit.show.preshow import pre_show_check

        return pre_show_check(sheet_path, log, static_pa, temperature_k, flames=True)  # the Run view's flame row
