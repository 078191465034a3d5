"""The one way in, the one way out and printable text (issue 14): unit checks and invariants."""

from __future__ import annotations

import os
import unicodedata

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from showkit.errors import OutputError, RigError, ShowkitError
from showkit.fileio import nesting_depth, parse_toml, read_text
from showkit.printable import printable
from showkit.safesave import clean_stale, keep_backup, write_text

# any text a file may hold, surrogates aside (not encodable as UTF-8)
TEXT = st.text(st.characters(blacklist_categories=("Cs",)), max_size=200)


@settings(max_examples=300, deadline=None)
@given(TEXT)
def test_printable_leaves_no_control_character(text):
    # Unicode category Cc is C0, DEL and C1 (the Unicode standard, General Category)
    shown = printable(text)
    assert not any(unicodedata.category(ch) == "Cc" for ch in shown)
    assert "\u202e" not in shown  # the right-to-left override is shown, not obeyed


@settings(max_examples=300, deadline=None)
@given(TEXT)
def test_printable_keeps_printable_text_as_it_is(text):
    clean = "".join(ch for ch in text if unicodedata.category(ch) != "Cc"
                    and ch not in "\u200e\u200f\u2028\u2029" and not "\u202a" <= ch <= "\u202e"
                    and not "\u2066" <= ch <= "\u2069")
    assert printable(clean) == clean


def test_printable_shows_escapes_visibly():
    assert printable("a\x1b[2Jb\x07") == "a\\x1b[2Jb\\x07"
    assert printable("c\x9bd") == "c\\x9bd"
    assert printable("one\ntwo", keep_newlines=True) == "one\ntwo"


def test_error_lines_are_one_printable_line():
    exc = ShowkitError("bad\nthing\x1b]0;x\x07", "cue \x1b[31mred", "fix\tit")
    line = exc.line()
    assert "\n" not in line and "\x1b" not in line and "\x07" not in line
    assert "\\x1b" in line


@settings(max_examples=200, deadline=None)
@given(TEXT, TEXT)
def test_any_notes_and_labels_read_back_exactly(notes, label):
    """Valid TOML is always readable back: whatever text a sheet holds survives a save."""
    from showkit.show.sheet import Cue, PauseSource, Sheet, parse_sheet, sheet_to_text

    sheet = Sheet(title=label or "t", rig="demo", notes=notes,
                  cues=[Cue(id="c" + label, source=PauseSource(1.0), label=label, notes=notes)])
    again = parse_sheet(sheet_to_text(sheet))
    assert again.notes == notes
    assert again.cues[0].notes == notes and again.cues[0].label == label


def test_nesting_is_measured_without_recursion():
    deep = []
    for _ in range(100_000):
        deep = [deep]
    assert nesting_depth(deep) > 32  # iterative: no RecursionError at any depth
    assert nesting_depth({"a": [1, {"b": [2]}]}) == 4


def test_deep_toml_is_one_line():
    with pytest.raises(RigError, match="nest too deeply"):
        parse_toml("a = " + "[" * 3000 + "]" * 3000, "r.toml", RigError)


def test_a_fifo_is_refused_without_waiting(tmp_path):
    fifo = tmp_path / "r.toml"
    os.mkfifo(fifo)
    with pytest.raises(RigError, match="named pipe"):
        read_text(fifo, "rig file", RigError)


def test_backup_replaces_a_planted_symlink_and_never_follows_it(tmp_path):
    victim = tmp_path / "outside.txt"
    victim.write_text("keep me")
    target = tmp_path / "show.toml"
    target.write_text("old")
    os.symlink(victim, tmp_path / "show.toml.bak")
    write_text(target, "new", backups=1)
    assert victim.read_text() == "keep me"
    assert not (tmp_path / "show.toml.bak").is_symlink()
    assert (tmp_path / "show.toml.bak").read_text() == "old"
    assert target.read_text() == "new"


def test_backup_is_a_hard_link_of_the_old_file(tmp_path):
    target = tmp_path / "rig.toml"
    target.write_text("v1")
    ino = target.stat().st_ino
    bak = keep_backup(target, 1)
    assert bak.stat().st_ino == ino  # the very file, not a copy


def test_backups_rotate(tmp_path):
    target = tmp_path / "rig.toml"
    for k in range(5):
        write_text(target, f"v{k}", backups=3)
    assert target.read_text() == "v4"
    assert (tmp_path / "rig.toml.bak").read_text() == "v3"
    assert (tmp_path / "rig.toml.bak.1").read_text() == "v2"
    assert (tmp_path / "rig.toml.bak.2").read_text() == "v1"
    assert not (tmp_path / "rig.toml.bak.3").exists()


def test_stale_temp_files_of_dead_runs_are_removed(tmp_path):
    import subprocess
    import sys

    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True).stdout.strip()
    stale = tmp_path / f".show.toml.{dead}.abcd1234.tmp"
    stale.write_text("half")
    live = tmp_path / f".show.toml.{os.getpid()}.abcd1234.tmp"
    live.write_text("mine")
    other = tmp_path / ".other.toml.1.abcd1234.tmp"
    other.write_text("not ours")
    removed = clean_stale(tmp_path, "show.toml")
    assert removed == [stale]
    assert live.exists() and other.exists()


def test_a_failed_write_changes_nothing(tmp_path, monkeypatch):
    import errno

    import showkit.safesave as safesave

    target = tmp_path / "show.toml"
    target.write_text("old")
    (tmp_path / "show.toml.bak").write_text("older")

    def full(fd):
        raise OSError(errno.ENOSPC, "No space left on device")

    monkeypatch.setattr(safesave.os, "fsync", full)
    with pytest.raises(OutputError, match="disk is full") as info:
        write_text(target, "new" * 1000, backups=1)
    assert "\n" not in info.value.line()
    assert target.read_text() == "old" and (tmp_path / "show.toml.bak").read_text() == "older"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["show.toml", "show.toml.bak"]


def test_protected_files_are_never_written(tmp_path):
    track = tmp_path / "song.wav"
    track.write_bytes(b"RIFF")
    os.symlink(track, tmp_path / "alias.wav")
    with pytest.raises(OutputError, match="will not write the file over"):
        write_text(tmp_path / "alias.wav", "x", protect=[(track, "the show reads it")])
    assert track.read_bytes() == b"RIFF"


def test_an_unchanged_track_is_not_hashed_again(tmp_path, monkeypatch):
    import numpy as np
    import soundfile as sf

    from showkit.analysis import audio, scancache

    monkeypatch.setenv("SHOWKIT_CACHE_DIR", str(tmp_path / "cache"))
    track = tmp_path / "t.wav"
    sf.write(track, np.zeros(800), 8000)
    calls = []
    real = audio.content_hash
    monkeypatch.setattr(audio, "content_hash", lambda p: (calls.append(p), real(p))[1])
    first = scancache.content_key(track)
    assert first == real(track) and len(calls) == 1
    assert scancache.content_key(track) == first and len(calls) == 1  # size and mtime first
    sf.write(track, np.ones(800) * 0.5, 8000)  # changed: hashed again
    os.utime(track, ns=(1, 1))
    assert scancache.content_key(track) != first and len(calls) == 2
