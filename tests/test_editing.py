"""The editing model (showkit.show.editing): gains stop at the ceiling, undo, autosave.

No terminal UI here: the model is the domain's, usable from any front end.  The
ceilings are set by hand (a CueCheck per cue, as the pre-show rule gives them), so
the tests need no rig and no sound; the reference is the rule itself: a gain is never
above its ceiling rounded down to 0.01 dB (``floor_db``, checked against a closed form).
"""

from __future__ import annotations

import math

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from showkit.errors import InputError, SheetError
from showkit.show.editing import SheetEditor
from showkit.show.lock import CueCheck
from showkit.show.sheet import Cue, Lock, PauseSource, Sheet, ToneSource, load_sheet

CEILINGS = {"a": -20.0, "b": -31.337, "c": -8.004}


def _lock(ceiling_db: float) -> Lock:
    return Lock(ceiling_db=ceiling_db, pressure_db=ceiling_db, full_scale_db=ceiling_db + 10.0,
                limited_by="pressure", source_hash="x" * 16, rig_hash="y" * 16, calibration_hash="z" * 16,
                static_pa=18.0, reserve=0.25, analysis_version=1)


def _check(cue_id: str, gain_db: float, ceiling_db: float | None, status: str = "ok") -> CueCheck:
    head = None if ceiling_db is None else ceiling_db - gain_db
    return CueCheck(cue_id, gain_db, ceiling_db, head, status, "test check", "pressure")


def _editor(tmp_path, autosave=True) -> SheetEditor:
    cues = [Cue(id=k, source=ToneSource(2.0, mode=n), label=f"cue {k}", gain_db=round(c - 6.0, 2),
                fade_in_s=0.5, fade_out_s=0.5, lock=_lock(c))
            for n, (k, c) in enumerate(CEILINGS.items(), 2)]
    cues.append(Cue(id="talk", source=PauseSource(5.0), label="Talk"))
    sheet = Sheet(title="Edit test", rig="demo", cues=cues, path=tmp_path / "edit.toml")
    ed = SheetEditor(sheet, autosave=autosave)
    _recheck(ed)
    return ed


def _recheck(ed: SheetEditor) -> None:
    """What the pre-show check gives here: each locked cue's ceiling is its lock's."""
    for cue in ed.sheet.cues:
        if cue.lock is not None:
            ed.checks[cue.id] = _check(cue.id, cue.gain_db, cue.lock.ceiling_db)


def test_a_gain_stops_at_the_ceiling_and_says_why(tmp_path):
    ed = _editor(tmp_path)
    change = ed.set_gain("b", 0.0)
    # closed form: the ceiling rounded down to the 0.01 dB step
    assert change.gain_db == math.floor(-31.337 * 100) / 100 == -31.34
    assert change.stopped and "stopped at the ceiling -31.34 dB" in change.note
    assert load_sheet(tmp_path / "edit.toml").cue("b").gain_db == -31.34  # autosaved
    assert ed.checks["b"].headroom_db == pytest.approx(-31.337 + 31.34)


def test_an_unknown_ceiling_lets_the_gain_only_come_down(tmp_path):
    ed = _editor(tmp_path)
    del ed.checks["a"]
    before = ed.sheet.cue("a").gain_db
    change = ed.nudge_gain("a", 0.5)
    assert change.stopped and change.gain_db == before and "only come down" in change.note
    assert ed.nudge_gain("a", -0.5).gain_db == before - 0.5
    ed.checks["a"] = _check("a", before, -20.0, status="stale")
    assert ed.set_gain("a", -1.0).gain_db == before - 0.5


@pytest.mark.parametrize("bad", [math.nan, math.inf, -math.inf])
def test_a_non_finite_gain_is_refused(tmp_path, bad):
    ed = _editor(tmp_path)
    with pytest.raises(InputError):
        ed.set_gain("a", bad)
    assert ed.sheet.cue("a").gain_db == -26.0 and not ed.can_undo


def test_delete_and_undo_bring_the_cue_back_saved(tmp_path):
    ed = _editor(tmp_path)
    ed.move("c", -5)
    assert [c.id for c in ed.sheet.cues] == ["c", "a", "b", "talk"]
    gone = ed.delete("a")
    assert gone.id == "a" and "a" not in [c.id for c in load_sheet(tmp_path / "edit.toml").cues]
    assert ed.undo()
    saved = load_sheet(tmp_path / "edit.toml")
    assert [c.id for c in saved.cues] == ["c", "a", "b", "talk"] and saved.cue("a") == ed.sheet.cue("a")
    assert ed.undo() and [c.id for c in ed.sheet.cues] == ["a", "b", "c", "talk"]
    assert not ed.undo()


def test_an_edit_the_reader_would_refuse_is_undone(tmp_path):
    ed = _editor(tmp_path)
    with pytest.raises(SheetError):
        ed.edit_cue("talk", then="later")
    assert ed.sheet.cue("talk").then == "wait" and not ed.can_undo
    with pytest.raises(InputError):
        ed.edit_cue("a", gain_db=0.0)  # a gain goes through set_gain (it stops at the ceiling)


def test_a_new_lock_forgets_the_old_ceiling_until_checked(tmp_path):
    ed = _editor(tmp_path)
    lower = [c for c in ed.sheet.cues if c.id == "c"][0]
    from dataclasses import replace

    notes = ed.apply_locks([replace(lower, lock=_lock(-30.0))])
    assert ed.sheet.cue("c").gain_db == -30.0 and notes  # brought down to the new ceiling
    assert ed.ceiling_of("c") is None                     # the old check's ceiling no longer counts
    assert ed.set_gain("c", -10.0).gain_db == -30.0


# ---------------------------------------------------------------- property
EDITS = st.lists(st.one_of(
    st.tuples(st.just("set"), st.sampled_from(["a", "b", "c", "talk"]),
              st.floats(-90, 30, allow_nan=False)),
    st.tuples(st.just("nudge"), st.sampled_from(["a", "b", "c"]), st.sampled_from([-1.0, -0.5, 0.5, 1.0, 7.3])),
    st.tuples(st.just("undo"), st.none(), st.none()),
    st.tuples(st.just("delete"), st.sampled_from(["a", "b", "c", "talk"]), st.none()),
    st.tuples(st.just("move"), st.sampled_from(["a", "b", "c"]), st.integers(-3, 3)),
    st.tuples(st.just("fade"), st.sampled_from(["a", "b", "c"]), st.floats(0.0, 1.0)),
    st.tuples(st.just("relock"), st.sampled_from(["a", "b", "c"]), st.floats(-60, 0, allow_nan=False)),
    st.tuples(st.just("recheck"), st.none(), st.none()),
), max_size=25)


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(edits=EDITS)
def test_no_sequence_of_edits_yields_a_gain_above_the_ceiling(tmp_path, edits):
    """Whatever is done (gains, undo, delete, moves, fades, new locks, checks), every locked
    cue's gain stays at or below its locked ceiling."""
    from dataclasses import replace

    ed = _editor(tmp_path, autosave=False)
    for op, cid, value in edits:
        present = cid is not None and cid in [c.id for c in ed.sheet.cues]
        if op == "set" and present:
            ed.set_gain(cid, value)
        elif op == "nudge" and present:
            ed.nudge_gain(cid, value)
        elif op == "undo":
            ed.undo()
        elif op == "delete" and present:
            ed.delete(cid)
        elif op == "move" and present:
            ed.move(cid, value)
        elif op == "fade" and present:
            ed.edit_cue(cid, fade_in_s=round(value, 2))
        elif op == "relock" and present:
            ed.apply_locks([replace(ed.sheet.cue(cid), lock=_lock(value))])
        elif op == "recheck":
            _recheck(ed)
        for cue in ed.sheet.cues:
            if cue.lock is not None:
                assert cue.gain_db <= cue.lock.ceiling_db, (op, cid, value, cue)


def test_undo_of_a_new_lock_forgets_its_ceiling(tmp_path):
    """A lock raised, checked, then undone: the raised ceiling no longer counts for the old lock."""
    from dataclasses import replace

    ed = _editor(tmp_path, autosave=False)
    ed.apply_locks([replace(ed.sheet.cue("c"), lock=_lock(-1.0))])
    _recheck(ed)
    assert ed.ceiling_of("c") == -1.0
    assert ed.undo() and ed.sheet.cue("c").lock.ceiling_db == pytest.approx(CEILINGS["c"], abs=0.01)
    assert ed.ceiling_of("c") is None
    ed.set_gain("c", 0.0)
    assert ed.sheet.cue("c").gain_db <= ed.sheet.cue("c").lock.ceiling_db


def test_undo_past_the_first_lock_keeps_it(tmp_path):
    """A fresh-user report: undoing more times than there were edits unlocked every cue (the first
    lock is an undo step).  Undo never takes a lock away: the cue keeps today's lock, its gain at most
    that ceiling."""
    from dataclasses import replace

    ed = _editor(tmp_path, autosave=False)
    ed.sheet.replace_cue("a", lock=None, gain_db=5.0)          # an unlocked cue, loud
    ed._undo.clear()
    ed.apply_locks([replace(ed.sheet.cue("a"), lock=_lock(-10.0))])
    assert ed.sheet.cue("a").gain_db == -13.0   # a first lock: the margin under the ceiling (start low)
    while ed.undo():
        pass
    a = ed.sheet.cue("a")
    assert a.lock is not None and a.lock.ceiling_db == -10.0 and a.gain_db <= -10.0


def test_a_passage_never_ends_past_its_track(tmp_path):
    """A fresh-user report: the last passage of a track (end 27.2254 s) was saved as 27.23 s, past the
    end, so the cue could never play.  The end is rounded down to 0.01 s."""
    ed = _editor(tmp_path, autosave=False)
    track = tmp_path / "piece.wav"
    track.write_bytes(b"")  # only its name and folder matter here
    for end in (27.2254, 27.2299, 27.0, 9.999999):
        cue = ed.add_passage(track, 6.1, end, -12.0)
        assert cue.source.end_s <= end and end - cue.source.end_s < 0.01 + 1e-9


def test_a_silent_cue_keeps_saying_silence_after_a_gain_change(tmp_path):
    """A pause's check (ok, plays nothing) stays "silence" when its gain moves under the cap;
    an over check of the same cue gives its ceiling as a figure (the rule of any cue)."""
    from showkit.show.status import SILENCE, SILENT_MESSAGE, ceiling_text

    ed = _editor(tmp_path)
    ed.checks["talk"] = CueCheck("talk", 0.0, 60.0, 60.0, "ok", SILENT_MESSAGE, "full_scale", plays_nothing=True)
    assert ed.checks["talk"].silent and ceiling_text(60.0, ed.checks["talk"].silent) == SILENCE
    assert ed.set_gain("talk", -3.0).gain_db == -3.0
    check = ed.checks["talk"]
    assert check.silent and check.message == SILENT_MESSAGE and check.headroom_db == 63.0
    over = CueCheck("talk", 61.0, 60.0, -1.0, "over", "gain is 1.00 dB above", "full_scale", plays_nothing=True)
    assert not over.silent and ceiling_text(over.ceiling_db, over.silent) == "+60.00"


def test_the_stop_note_names_the_limit_that_set_the_ceiling(tmp_path):
    """The note at a stop says why: hole pressure (a pressure-limited cue), clipping (full scale) or, for
    a cue that plays nothing, the cap on its gain -- never "the safe line" for silence."""
    from showkit.show.status import SILENT_MESSAGE

    ed = _editor(tmp_path)
    assert "safe line" in ed.set_gain("b", 0.0).note
    ed.checks["a"] = CueCheck("a", -26.0, -20.0, 6.0, "ok", "test check", "full_scale")
    assert "clip" in ed.set_gain("a", 0.0).note
    ed.checks["talk"] = CueCheck("talk", 0.0, 60.0, 60.0, "ok", SILENT_MESSAGE, "full_scale", plays_nothing=True)
    change = ed.set_gain("talk", 70.0)
    assert change.stopped and change.gain_db == 60.0
    assert "plays nothing" in change.note and "safe line" not in change.note


def test_headroom_of_a_cue_over_by_a_hair_never_reads_minus_zero():
    """A gain locked at the ceiling and a static pressure a hair lower today: the check table's
    headroom shows how much over (it read "-0.00" beside "over"); the amount never prints as
    "0.00" or in exponent form.  Closed form: 20 log10(19.927 / 20) = -0.0317 dB."""
    import math

    from showkit.show.status import headroom_text, over_amount_text

    over = -20 * math.log10(19.927 / 20)
    assert headroom_text(-over) == "-0.03"
    assert headroom_text(-0.0043) == "-0.0043"
    assert headroom_text(-1e-8) == "-<0.001"
    assert headroom_text(0.0) == "+0.00" and headroom_text(1.234) == "+1.23"
    assert headroom_text(None) == "-" and headroom_text(-3.0, silent=True) == "-"
    assert over_amount_text(1e-8) == "<0.001" and over_amount_text(0.25) == "0.25"


def test_a_cue_above_its_first_ceiling_starts_low_and_a_relocked_one_at_its_ceiling(tmp_path):
    """A new tone (gain -40 dB) locked at a ceiling of -41.3 dB was set at -41.3: a fresh user
    expected the margin a passage from a track gets.  A first lock now sets the gain
    PASSAGE_MARGIN_DB under the ceiling; a cue locked before (its sound edited) comes down to it."""
    from dataclasses import replace

    from showkit.show.editing import PASSAGE_MARGIN_DB

    ed = _editor(tmp_path, autosave=False)
    ed.sheet.replace_cue("a", lock=None, gain_db=-40.0)
    notes = ed.apply_locks([replace(ed.sheet.cue("a"), lock=_lock(-41.3))])
    assert ed.sheet.cue("a").gain_db == pytest.approx(-41.3 - PASSAGE_MARGIN_DB) and "start low" in notes[0]
    notes = ed.apply_locks([replace(ed.sheet.cue("c"), lock=_lock(-50.0))])
    assert ed.sheet.cue("c").gain_db == -50.0 and "brought down to its ceiling" in notes[0]
    ed.sheet.replace_cue("b", lock=None, gain_db=-60.0)      # below its first ceiling: left as written
    assert ed.apply_locks([replace(ed.sheet.cue("b"), lock=_lock(-41.3))]) == []
    assert ed.sheet.cue("b").gain_db == -60.0
