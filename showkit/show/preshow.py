"""The pre-show check, shared by `showkit run` and the UI's run view.

Today's manometer reading and gas temperature re-derive every ceiling
(:func:`showkit.show.render.render_for_playback`); each reading and each
cue's verdict goes to the show log (:mod:`showkit.show.showlog`) as a
``check`` event.  Nothing here prints: the caller shows the result.
"""

from __future__ import annotations


def pre_show_check(sheet_path, log, static_pa: float | None = None,
                   temperature_k: float | None = None):
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
                                                temperature_k=temperature_k)
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
