"""The pre-show check, shared by `showkit run` and the UI's run view.

Today's manometer reading and gas temperature re-derive every ceiling
(:func:`showkit.show.render.render_for_playback`); each reading and each
cue's verdict goes to the show log (:mod:`showkit.show.showlog`) as a
``check`` event.  Nothing here prints: the caller shows the result.

:func:`cue_for_today` is the one rule for how today's conditions meet a lock,
used by the pre-show check (:func:`showkit.show.render.render_for_playback`),
by ``showkit check`` and by every view of the terminal UI (:func:`checks_for_today`).
"""

from __future__ import annotations

from showkit.errors import ShowkitError

#: A gas temperature within this of the rig file's is the rig file's, K (the
#: dialogs and the screen show temperatures to 0.1 C).
SAME_TEMPERATURE_K = 0.05


def cue_for_today(sheet, file_rig, today_rig, cue, signal=None, signals=None):
    """The cue as it plays today, and its check.

    Whether a lock is valid (not stale) is judged against the rig file, with its
    own gas temperature: a lock made for the rig file stays valid whatever the
    gas temperature is today, so a temperature typed in never makes a passage or
    a pause stale, and nothing is stale after a restart because of it.  Today's
    static pressure and reserve re-derive a valid lock's ceiling exactly
    (:func:`showkit.show.lock.today_ceiling`).  When today's gas temperature
    differs from the rig file's (by more than :data:`SAME_TEMPERATURE_K`), the
    modes move: a valid cue is locked again, in memory, for today's gas (tone and
    glide cues on modes follow the modes, as `showkit run --temperature` plays
    them), its gain unchanged, and checked against that ceiling.  Nothing is
    written to the sheet.

    Parameters
    ----------
    sheet : Sheet
    file_rig : Rig
        The rig as its file gives it.
    today_rig : Rig
        The same rig with today's conditions (``file_rig.with_conditions(...)``).
    cue : Cue
    signal : CueSignal, optional
        The cue's source signal on the rig file's gas, when already made.
    signals : SignalMemo, optional
        The pass's signals (:class:`showkit.show.sources.SignalMemo`): the check, the
        relock and a render that follows (with the same memo) build the sound once.
        None: a memo for this call only.

    Returns
    -------
    cue : Cue
        The cue to render today (with today's lock when the temperature moved).
    check : CueCheck
        ``ok``, ``over``, ``stale`` or ``error`` (:class:`showkit.show.status.CueStatus`),
        with today's ceiling.
    """
    from dataclasses import replace

    from showkit.show.lock import CueCheck, check_cue, lock_cue
    from showkit.show.sources import SignalMemo
    from showkit.show.status import CueStatus

    signals = SignalMemo() if signals is None else signals
    same_gas = abs(today_rig.temperature_k - file_rig.temperature_k) <= SAME_TEMPERATURE_K
    file_today = file_rig.with_conditions(static_pa=today_rig.static_pa, reserve=today_rig.reserve)
    state = check_cue(sheet, file_today, cue, signal=signal, signals=signals)
    if same_gas or state.status in (CueStatus.STALE, CueStatus.ERROR):
        return cue, state
    try:
        relocked, _ = lock_cue(sheet, today_rig, cue, signals)
    except ShowkitError as exc:
        return cue, CueCheck(cue.id, cue.gain_db, None, None, CueStatus.ERROR, exc.line())
    relocked = replace(relocked, gain_db=cue.gain_db)  # a gain that no longer fits is not clamped silently
    return relocked, check_cue(sheet, today_rig, relocked, signals=signals)


def checks_for_today(sheet, file_rig, today_rig) -> list:
    """:func:`cue_for_today`'s check of every cue, in show order, the sound of each built once
    (``showkit check`` and the UI's Show view)."""
    from showkit.show.sources import SignalMemo

    signals = SignalMemo()
    return [cue_for_today(sheet, file_rig, today_rig, c, signals=signals)[1] for c in sheet.cues]



def pre_show_check(sheet_path, log, static_pa: float | None = None,
                   temperature_k: float | None = None, flames: bool = False):
    """Render the sheet for playback with today's readings, logging every reading and verdict.

    Parameters
    ----------
    sheet_path : path-like
        The cue sheet (TOML), saved.
    log : ShowLog
        Where the ``check`` events go.
    static_pa : float, optional
        Today's static overpressure from the manometer, Pa (None: the rig file's).
    temperature_k : float, optional
        Today's gas temperature, K (None: the rig file's).
    flames : bool
        Also predict each cue's flame row in its verification (:attr:`RenderedCue.flames`).

    Returns
    -------
    cues : list of RenderedCue
        In show order; cues that may not be played carry their status and why.
    problems : list of str
        What the check used, then one line per cue that does not fit.
    """
    from showkit.show import render

    reading = []
    if static_pa is not None:
        reading.append(f"static {static_pa:g} Pa (manometer)")
    if temperature_k is not None:
        reading.append(f"gas {temperature_k - 273.15:.1f} C")
    log.write("check", None, None, f"pre-show check of {sheet_path}: "
              + (", ".join(reading) if reading else "the rig file's static pressure and temperature"))
    cues, problems = render.render_for_playback(sheet_path, static_pa=static_pa,
                                                temperature_k=temperature_k, flames=flames)
    for line in problems:
        if not line.startswith("cue "):
            log.write("check", None, None, line)
    for cue in cues:
        if cue.playable:
            room = "" if cue.ceiling_db is None else f", headroom {cue.ceiling_db - cue.gain_db:.1f} dB"
            log.write("check", cue.id, cue.gain_db, f"ok{room}")
        else:
            log.write("check", cue.id, cue.gain_db, f"{cue.status}: {cue.message}")
    return cues, problems
