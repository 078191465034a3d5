"""The one sheet writer (issue 16 item 4): tomlkit, in place, finite and rounded numbers.

Saving edits the text the sheet was read from: the presenter's comments (top,
between cues, inside cues) and their spelling of the values showkit did not
change stay; what changed is written as finite numbers rounded to what they
mean (levels to 0.01 dB, rounded down; lock times to 1 ms).
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import replace

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from showkit.errors import SheetError
from showkit.show.lock import lock_problem, lock_sheet
from showkit.show.sheet import (AudioSource, Cue, GlideSource, Lock, PauseSource, Sheet, ToneSource,
                                load_sheet, parse_sheet, rounded_lock, save_sheet, sheet_to_text)

COMMENTED = '''# Science night, hall B
# (the presenter's own notes)
title = "Science night"
rig = "demo"
format = 1

# first the welcome: a tone on mode 3
[[cue]]
id = "welcome"   # the doors open
label = "Welcome"
# quiet: the audience is still coming in
tone = { mode = 3, duration = "0:08" }
gain = -34
fade_in = "250 ms"
fade_out = 1

# then a pause for talking
[[cue]]
id = "talk"
pause = { duration = "12 s" }  # two sentences
then = "wait"
'''


def _lock(ceiling_db: float = -21.333333333, **changes) -> Lock:
    base = Lock(ceiling_db=ceiling_db, pressure_db=ceiling_db, full_scale_db=math.inf, limited_by="pressure",
                source_hash="s", rig_hash="r", calibration_hash="c", static_pa=40.0, reserve=0.2,
                analysis_version=1, worst_time_s=1.23456)
    return replace(base, **changes)


def test_an_unchanged_sheet_is_written_back_byte_for_byte():
    assert sheet_to_text(parse_sheet(COMMENTED)) == COMMENTED


def test_lock_keeps_comments_everywhere_and_the_spelling_of_unchanged_values(tmp_path):
    path = tmp_path / "show.toml"
    path.write_text(COMMENTED)
    sheet = load_sheet(path)
    lock_sheet(sheet)  # the demo rig: a real lock, as `showkit lock` makes it
    save_sheet(sheet)
    text = path.read_text()
    for line in COMMENTED.splitlines():
        if line.startswith("#") or "#" in line:  # every comment line and every commented line
            assert line in text, line
    assert 'tone = { mode = 3, duration = "0:08" }' in text  # "0:08" stays "0:08", not 8.0
    assert 'fade_in = "250 ms"' in text and 'pause = { duration = "12 s" }  # two sentences' in text
    data = tomllib.loads(text)
    assert all("lock" in cue for cue in data["cue"])
    again = load_sheet(path)
    assert again.cues == sheet.cues  # what is in memory is what is on disk
    assert all(lock_problem(c.lock) is None for c in again.cues)


def test_an_unchanged_gain_keeps_its_spelling_and_a_changed_one_is_written_to_the_hundredth():
    sheet = parse_sheet(COMMENTED)
    assert "gain = -34\n" in sheet_to_text(sheet)
    sheet.replace_cue("welcome", gain_db=-21.330000000000002)  # what 0.01 * -2133 gives
    text = sheet_to_text(sheet)
    assert "gain = -21.33\n" in text and "-21.330000000000002" not in text


def test_lock_numbers_are_finite_and_rounded_to_what_they_mean():
    sheet = parse_sheet(COMMENTED)
    sheet.replace_cue("welcome", lock=_lock())
    data = tomllib.loads(sheet_to_text(sheet))["cue"][0]["lock"]
    assert data["ceiling_db"] == -21.34 and data["pressure_db"] == -21.34  # rounded DOWN: never louder
    assert data["worst_time_s"] == 1.235  # to 1 ms
    assert "full_scale_db" not in data  # no limit: left out (reads back as +inf), never "inf"
    assert parse_sheet(sheet_to_text(sheet)).cues[0].lock == rounded_lock(_lock())


def test_rounded_limits_stay_consistent_at_a_tie():
    # -3.001 (pressure) and -3.004 (full scale) both round down to -3.01: the ceiling is still
    # the lower of the two limits as combine() says, so the lock is not thrown out as damaged
    lock = rounded_lock(_lock(-3.004, pressure_db=-3.001, full_scale_db=-3.004, limited_by="full_scale"))
    assert lock.ceiling_db == -3.01 and lock_problem(lock) is None


@pytest.mark.parametrize("field, value", [("ceiling_db", math.nan), ("worst_time_s", math.inf),
                                          ("static_pa", math.nan), ("pressure_db", -math.inf)])
def test_a_lock_with_a_non_finite_number_is_refused_before_writing(tmp_path, field, value):
    path = tmp_path / "show.toml"
    path.write_text(COMMENTED)
    sheet = load_sheet(path)
    sheet.replace_cue("welcome", lock=_lock(**{field: value}))
    with pytest.raises(SheetError) as info:
        save_sheet(sheet)
    assert "\n" not in info.value.line() and "cue welcome" in info.value.line()
    assert path.read_text() == COMMENTED  # nothing was written
    assert not (tmp_path / "show.toml.bak").exists()


def test_a_non_finite_gain_or_fade_is_refused():
    sheet = parse_sheet(COMMENTED)
    sheet.replace_cue("talk", gain_db=math.inf)
    with pytest.raises(SheetError, match="non-finite"):
        sheet_to_text(sheet)
    sheet = parse_sheet(COMMENTED)
    sheet.replace_cue("talk", fade_out_s=math.nan)
    with pytest.raises(SheetError, match="cue talk: fade_out"):
        sheet_to_text(sheet)


def test_reordered_added_and_removed_cues_keep_their_comments():
    sheet = parse_sheet(COMMENTED)
    sheet.cues.reverse()
    sheet.cues.append(Cue(id="new", source=AudioSource("song.flac", 1.5, 9.0), gain_db=-10.0))
    text = sheet_to_text(sheet)
    again = parse_sheet(text)
    assert [c.id for c in again.cues] == ["talk", "welcome", "new"]
    assert again.cues == sheet.cues
    assert "# quiet: the audience is still coming in" in text and "# two sentences" in text
    del sheet.cues[0]
    again = parse_sheet(sheet_to_text(sheet))
    assert [c.id for c in again.cues] == ["welcome", "new"]


def test_an_old_lock_with_inf_as_text_still_reads_and_is_rewritten_as_a_number():
    text = COMMENTED.replace('then = "wait"\n', 'then = "wait"\n\n[cue.lock]\nceiling_db = -20.0\n'
                             'pressure_db = -20.0\nfull_scale_db = "inf"\nlimited_by = "pressure"\n'
                             'source_hash = "s"\nrig_hash = "r"\ncalibration_hash = "c"\nstatic_pa = 1000.0\n'
                             'reserve = 0.2\nanalysis_version = 1\n')
    sheet = parse_sheet(text)
    assert sheet.cues[1].lock.full_scale_db == math.inf
    sheet.replace_cue("talk", lock=replace(sheet.cues[1].lock, ceiling_db=-19.0, pressure_db=-19.0))
    out = sheet_to_text(sheet)
    assert '"inf"' not in out and parse_sheet(out).cues[1].lock.full_scale_db == math.inf


# -- property: any sheet showkit can hold is saved and read back equal --------------------------------

_TEXT = st.text(st.characters(codec="utf-8", exclude_categories=("Cs",)), max_size=20)  # controls included
_TIMES = st.floats(0.0, 3600.0, allow_nan=False)
_DURATIONS = st.floats(0.01, 900.0)  # MAX_GENERATED_S
_SOURCES = st.one_of(
    st.builds(lambda p, a, b: AudioSource(p or "x.wav", a, None if b is None else a + b),
              _TEXT, _TIMES, st.none() | _DURATIONS),
    st.builds(lambda d, m: ToneSource(d, mode=m), _DURATIONS, st.integers(0, 40)),
    st.builds(lambda d, f: ToneSource(d, frequency_hz=f), _DURATIONS, st.floats(1.0, 20000.0)),
    st.builds(lambda d, m, f: GlideSource(d, from_mode=m, to_frequency_hz=f), _DURATIONS,
              st.integers(0, 40), st.floats(1.0, 20000.0)),
    st.builds(PauseSource, _DURATIONS))
_CUES = st.builds(
    lambda source, label, notes, hundredths, fin, fout, then, ride: dict(
        source=source, label=label, notes=notes, gain_db=hundredths / 100, fade_in_s=fin, fade_out_s=fout,
        then=then, ride=ride),
    _SOURCES, _TEXT, _TEXT, st.integers(-12000, 2000), _TIMES, _TIMES, st.sampled_from(("wait", "next")),
    st.booleans())


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(title=_TEXT, notes=_TEXT, cues=st.lists(st.tuples(_TEXT, _CUES), max_size=5,
                                                 unique_by=lambda t: t[0].strip() or "_"))
def test_any_sheet_is_saved_and_read_back_equal(title, notes, cues):
    cues = [Cue(id=(cid.strip() and cid) or f"c{k}", **fields) for k, (cid, fields) in enumerate(cues)]
    if len({c.id for c in cues}) != len(cues):
        return
    sheet = Sheet(title=title, rig="demo", notes=notes, cues=cues)
    text = sheet_to_text(sheet)
    again = parse_sheet(text)
    assert again.cues == sheet.cues
    assert (again.title, again.notes) == (title, notes)
    # and an edit of the read sheet writes back what it says
    if again.cues:
        again.replace_cue(again.cues[0].id, label=again.cues[0].label + "\f", gain_db=-1.25)
        third = parse_sheet(sheet_to_text(again))
        assert third.cues == again.cues


def test_control_characters_are_escaped_and_read_back():
    # TOML 1.0 (toml.io, "String"): control characters other than tab must be escaped in basic strings
    text = "a\x00b\x7fc\rd\x1be\u2028f\"g\\h\f"
    sheet = Sheet(title="t\x7f", rig="demo", notes=text,
                  cues=[Cue(id="x\x00", source=PauseSource(1.0), label=text, notes=text)])
    out = sheet_to_text(sheet)
    assert "\x00" not in out and "\x7f" not in out and "\f" not in out
    again = parse_sheet(out)
    assert again.cues == sheet.cues and again.notes == text and again.title == "t\x7f"


def test_the_edited_document_is_kept_and_stays_right_across_edits_reverts_and_refusals(tmp_path):
    path = tmp_path / "show.toml"
    path.write_text(COMMENTED)
    sheet = load_sheet(path)
    first = sheet_to_text(sheet)
    assert sheet_to_text(sheet) is first  # unchanged: the same text, no work
    sheet.replace_cue("welcome", gain_db=-40.0)
    assert "gain = -40.0\n" in sheet_to_text(sheet)
    sheet.replace_cue("welcome", gain_db=-34.0)  # back: what is written says -34 again
    assert parse_sheet(sheet_to_text(sheet)).cues == sheet.cues
    sheet.replace_cue("welcome", gain_db=-20.0, lock=_lock(ceiling_db=math.nan))
    with pytest.raises(SheetError):
        sheet_to_text(sheet)  # refused half-way: the half-edited document is dropped
    sheet.replace_cue("welcome", gain_db=-34.0, lock=None)
    text = sheet_to_text(sheet)
    assert parse_sheet(text).cues == sheet.cues and "# quiet: the audience is still coming in" in text
    save_sheet(sheet)
    sheet.replace_cue("talk", label="Talk")
    again = parse_sheet(sheet_to_text(sheet))
    assert again.cues == sheet.cues and again.cue("talk").label == "Talk"


def test_a_lock_taken_off_and_put_back_is_written():
    """A cue's lock removed and a new one written in the same document: tomlkit left a keyless
    placeholder where the old [cue.lock] was, which moved into the new table and made the sheet
    unwritable ("Non comment/whitespace items must have an associated key")."""
    sheet = parse_sheet(COMMENTED, "s.toml")
    cue = sheet.cues[0]
    lock = Lock(ceiling_db=-20.0, pressure_db=-20.0, full_scale_db=-10.0, limited_by="pressure",
                source_hash="x" * 16, rig_hash="y" * 16, calibration_hash="z" * 16, static_pa=18.0,
                reserve=0.25, analysis_version=1)
    sheet.replace_cue(cue.id, lock=lock)
    sheet_to_text(sheet)
    sheet.replace_cue(cue.id, lock=None)
    sheet_to_text(sheet)
    sheet.replace_cue(cue.id, lock=replace(lock, ceiling_db=-25.0, pressure_db=-25.0))
    text = sheet_to_text(sheet)
    back = parse_sheet(text, "s.toml")
    assert back.cue(cue.id).lock.ceiling_db == -25.0
    assert "# then a pause for talking" in text   # the comment before the next cue stays
