"""The cue sheet file: parsing, bad input, round trip and safe saving (issue 5)."""

from __future__ import annotations

import os
from pathlib import Path

import pytest

from showkit.errors import SheetError
from showkit.show.sheet import (AudioSource, GlideSource, PauseSource, ToneSource, load_sheet,
                                parse_sheet, save_sheet, sheet_to_text)

DEMO_SHOW = Path(__file__).resolve().parent.parent / "showkit" / "data" / "demo_show.toml"
EXAMPLES = sorted((Path(__file__).resolve().parent.parent / "cues").glob("*.toml"))

BASE = 'title = "t"\nrig = "demo"\nformat = 1\n'


def _one_line_error(text: str, *needles: str) -> str:
    with pytest.raises(SheetError) as info:
        parse_sheet(BASE + text, "show.toml")
    line = info.value.line()
    assert "\n" not in line
    assert line.startswith("show.toml")
    for needle in needles:
        assert needle in line, (needle, line)
    return line


def test_demo_and_examples_parse_with_every_source_kind():
    kinds = set()
    for path in [DEMO_SHOW, *EXAMPLES]:
        sheet = load_sheet(path)
        assert sheet.cues, path
        kinds |= {c.kind for c in sheet.cues}
    assert kinds == {"audio", "tone", "glide", "pause"}


def test_fields_are_read_in_si():
    sheet = parse_sheet(BASE + '''
[[cue]]
id = "a"
label = "passage"
audio = "x.flac"
start = "1:05.5"
end = "1:10"
gain = "-12 dB"
fade_in = "250 ms"
fade_out = 2
then = "next"
ride = true
notes = "n"

[[cue]]
id = "b"
tone = { frequency = "0.2 kHz", duration = "10 s" }

[[cue]]
id = "c"
glide = { from_mode = 2, to_frequency = "400 Hz", duration = 5 }

[[cue]]
id = "d"
pause = { duration = "0:30" }
''')
    a, b, c, d = sheet.cues
    assert a.source == AudioSource("x.flac", 65.5, 70.0)
    assert (a.gain_db, a.fade_in_s, a.fade_out_s, a.then, a.ride, a.notes) == (-12.0, 0.25, 2.0, "next", True, "n")
    assert b.source == ToneSource(10.0, frequency_hz=200.0)
    assert c.source == GlideSource(5.0, from_mode=2, to_frequency_hz=400.0)
    assert d.source == PauseSource(30.0)
    assert b.then == "wait" and b.gain_db == 0.0


@pytest.mark.parametrize("text, needles", [
    ('[[cue]]\nid = "a"\ntone = { mode = 1, duration = 0 }\n', ["cue a", "tone.duration", "greater than zero"]),
    ('[[cue]]\nid = "a"\npause = { duration = -3 }\n', ["cue a", "pause.duration"]),
    ('[[cue]]\nid = "a"\naudio = "x.wav"\nstart = 10\nend = 4\n', ["cue a", "end", "not after start"]),
    ('[[cue]]\nid = "a"\npause = { duration = 1 }\n[[cue]]\nid = "a"\npause = { duration = 2 }\n',
     ["cue a", "duplicate"]),
    ('[[cue]]\nid = "a"\ntone = { mode = 1.5, duration = 2 }\n', ["cue a", "tone.mode"]),
    ('[[cue]]\nid = "a"\ntone = { frequency = "200 furlongs", duration = 2 }\n', ["cue a", "tone.frequency", "unit"]),
    ('[[cue]]\nid = "a"\ntone = { mode = 1, duration = "5 fortnights" }\n', ["cue a", "tone.duration"]),
    ('[[cue]]\nid = "a"\npause = { duration = 1 }\ngain = "loud"\n', ["cue a", "gain"]),
    ('[[cue]]\nid = "a"\npause = { duration = 1 }\nthen = "go"\n', ["cue a", "then"]),
    ('[[cue]]\nid = "a"\npause = { duration = 1 }\ntone = { mode = 1, duration = 1 }\n', ["cue a", "exactly one source"]),
    ('[[cue]]\nid = "a"\n', ["cue a", "exactly one source"]),
    ('[[cue]]\nlabel = "no id"\npause = { duration = 1 }\n', ["cue #1", "id"]),
    ('[[cue]]\nid = "a"\npause = { duration = 1 }\nfade_inn = 2\n', ["cue a", "fade_inn", "fade_in"]),
    ('[[cue]]\nid = "a"\ntone = { mode = 2, frequency = 100, duration = 1 }\n', ["cue a", "either mode or frequency"]),
    ('[[cue]]\nid = "a"\nglide = { from_mode = 2, duration = 1 }\n', ["cue a", "to_mode"]),
    ('[[cue]]\nid = "a"\npause = { duration = 1 }\nride = "yes"\n', ["cue a", "ride"]),
])
def test_bad_cues_give_one_line_naming_sheet_cue_and_field(text, needles):
    _one_line_error(text, *needles)


def test_newer_format_and_unknown_top_level_keys_are_refused():
    with pytest.raises(SheetError, match="newer"):
        parse_sheet('title = "t"\nformat = 99\n', "s.toml")
    with pytest.raises(SheetError, match="did you mean 'title'"):
        parse_sheet('titel = "t"\nformat = 1\n', "s.toml")


def test_toml_syntax_error_names_line(tmp_path):
    path = tmp_path / "broken.toml"
    path.write_text('title = "t"\n[[cue]\n')
    with pytest.raises(SheetError) as info:
        load_sheet(path)
    assert "line 2" in info.value.line() and str(path) in info.value.line()


def test_round_trip_keeps_every_field(tmp_path):
    for source in [DEMO_SHOW, *EXAMPLES]:
        sheet = load_sheet(source)
        out = tmp_path / source.name
        save_sheet(sheet, out)
        again = load_sheet(out)
        assert again.cues == sheet.cues
        assert (again.title, again.rig, again.notes, again.format) == (sheet.title, sheet.rig, sheet.notes, sheet.format)
        assert sheet_to_text(again) == out.read_text()


def test_save_keeps_previous_version_as_backup(tmp_path):
    path = tmp_path / "show.toml"
    path.write_text(DEMO_SHOW.read_text())
    before = path.read_text()
    sheet = load_sheet(path)
    sheet.replace_cue("welcome", label="changed")
    save_sheet(sheet)
    assert (tmp_path / "show.toml.bak").read_text() == before
    assert load_sheet(path).cue("welcome").label == "changed"


def test_interrupted_save_leaves_the_old_sheet_intact(tmp_path):
    path = tmp_path / "show.toml"
    path.write_text(DEMO_SHOW.read_text())
    before = path.read_text()
    sheet = load_sheet(path)
    sheet.replace_cue("welcome", label="never saved")

    def crash():
        raise OSError("power cut between write and rename")

    with pytest.raises(SheetError, match="cannot save"):
        save_sheet(sheet, _before_rename=crash)
    assert path.read_text() == before
    assert [p.name for p in tmp_path.iterdir()] == ["show.toml"]  # no temp file left behind


def test_unreadable_folder_save_reports_cleanly(tmp_path):
    sheet = load_sheet(DEMO_SHOW)
    with pytest.raises(SheetError) as info:
        save_sheet(sheet, tmp_path / "missing-folder" / "s.toml")
    assert "\n" not in info.value.line()
    assert not (tmp_path / "missing-folder").exists()


def test_atomic_write_fsyncs(monkeypatch, tmp_path):
    calls = []
    real = os.fsync
    monkeypatch.setattr(os, "fsync", lambda fd: (calls.append(fd), real(fd)))
    save_sheet(load_sheet(DEMO_SHOW), tmp_path / "s.toml")
    assert calls, "save must fsync the new file before the rename"


def test_saving_keeps_the_header_comments_and_the_file_permissions(tmp_path):
    path = tmp_path / "show.toml"
    path.write_text("# my show\n# second line\n\n" + DEMO_SHOW.read_text())
    path.chmod(0o640)
    sheet = load_sheet(path)
    sheet.replace_cue("welcome", label="changed")
    save_sheet(sheet)
    text = path.read_text()
    assert text.startswith("# my show\n# second line\n")
    assert oct(path.stat().st_mode & 0o777) == oct(0o640)
    fresh = tmp_path / "new.toml"
    old = os.umask(0o022)
    try:
        save_sheet(sheet, fresh)
    finally:
        os.umask(old)
    assert oct(fresh.stat().st_mode & 0o777) == oct(0o644)  # a new file: 0666 less the umask


def test_a_sheet_without_a_rig_line_is_refused_not_given_the_demo_rig():
    """Issue 11: a sheet with no `rig =` silently used the demo rig (a ceiling moved from
    -21.3 to -3.2 dB); now it is one line saying what to write."""
    with pytest.raises(SheetError) as info:
        parse_sheet('title = "t"\nformat = 1\n[[cue]]\nid = "a"\npause = { duration = 2 }\n', "show.toml")
    line = info.value.line()
    assert line.startswith("show.toml: rig:") and 'rig = "demo"' in line and "path" in line
