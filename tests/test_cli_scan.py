"""`showkit scan`: table, JSON contract, CSV, bad files in a folder, exit status."""

from __future__ import annotations

import csv
import json
import os

import numpy as np
import pytest
import soundfile as sf

from showkit.cli.main import main
from showkit.demo import synth


@pytest.fixture(autouse=True)
def cache(tmp_path, monkeypatch):
    monkeypatch.setenv("SHOWKIT_CACHE_DIR", str(tmp_path / "cache"))


@pytest.fixture
def folder(tmp_path):
    d = tmp_path / "music"
    (d / "sub").mkdir(parents=True)
    sf.write(str(d / "good.flac"), synth.notes_track([(0.0, 5.0, synth.DEMO_MODE_HZ[3], 0.4)], 5.0),
             synth.RATE_HZ)
    sf.write(str(d / "sub" / "hits.wav"), synth.drum_pattern(5.0), synth.RATE_HZ)
    return d


def add_bad_files(d):
    good = (d / "good.flac").read_bytes()
    (d / "corrupt.flac").write_bytes(good[:4000])  # truncated in the middle of the stream
    (d / "empty.wav").write_bytes(b"")
    (d / "notes.mp3").write_text("not audio at all\n")
    os.symlink(d / "missing.wav", d / "gone.wav")  # unreadable: a link to nothing
    (d / "folder.wav").mkdir()  # a folder with an audio name
    (d / "cover.jpg").write_bytes(b"\xff\xd8")  # not audio by name: skipped


def run_json(capsys, *args):
    status = main(["scan", *map(str, args), "--json", "--jobs", "2"])
    out = capsys.readouterr()
    return status, json.loads(out.out), out.err


def test_json_contract(folder, capsys):
    status, data, err = run_json(capsys, folder)
    assert status == 0
    tracks = data["tracks"]
    assert [os.path.basename(t["path"]) for t in tracks] == ["good.flac", "hits.wav"]  # by score
    for t in tracks:
        assert set(t) >= {"path", "duration_s", "score", "transpose_semitones", "transpose_score",
                          "error", "passages"}
        assert t["error"] is None and 0 <= t["score"] <= 100
        for p in t["passages"]:
            # the scan's ceiling is named as the estimate it is, never a plain ceiling_db to play at
            assert set(p) >= {"start_s", "end_s", "score", "modes", "estimated_ceiling_db", "contrast"}
            assert "ceiling_db" not in p
            assert 0 <= p["start_s"] < p["end_s"] <= t["duration_s"] + 1e-6
    assert tracks[0]["passages"][0]["modes"][0] == 3
    assert "CAUTION" in err


def test_bad_files_are_reported_and_the_scan_goes_on(folder, capsys):
    add_bad_files(folder)
    status, data, err = run_json(capsys, folder)
    assert status == 0
    by_name = {os.path.basename(t["path"]): t for t in data["tracks"]}
    assert "cover.jpg" not in by_name
    for bad, words in [("corrupt.flac", "decoded"), ("empty.wav", "empty"), ("notes.mp3", "not an audio"),
                       ("gone.wav", "no such"), ("folder.wav", "folder")]:
        assert by_name[bad]["error"] and words in by_name[bad]["error"], bad
        assert by_name[bad]["score"] is None
    assert by_name["good.flac"]["error"] is None and by_name["sub/hits.wav".split("/")[-1]]["error"] is None
    assert [t["error"] is None for t in data["tracks"]][:2] == [True, True]  # errors listed last
    assert "scanning" in err or "CAUTION" in err


@pytest.mark.skipif(os.geteuid() == 0, reason="root can read a file whatever its mode")
def test_unreadable_file(folder, capsys):
    p = folder / "locked.wav"
    sf.write(str(p), np.zeros(4410), 44100)
    p.chmod(0)
    try:
        _, data, _ = run_json(capsys, folder)
    finally:
        p.chmod(0o644)
    t = next(t for t in data["tracks"] if t["path"].endswith("locked.wav"))
    assert "cannot read" in t["error"]


def test_exit_2_when_nothing_could_be_read(tmp_path, capsys):
    (tmp_path / "a.wav").write_text("x")
    (tmp_path / "b.flac").write_bytes(b"")
    status = main(["scan", str(tmp_path / "a.wav"), str(tmp_path / "b.flac")])
    out = capsys.readouterr()
    assert status == 2
    assert "ERROR" in out.out and "a.wav" in out.out and "b.flac" in out.out


def test_table_and_csv(folder, tmp_path, capsys):
    target = tmp_path / "out.csv"
    status = main(["scan", str(folder / "good.flac"), "--csv", str(target)])
    out = capsys.readouterr().out
    assert status == 0
    assert "good.flac" in out and "n3 F3" in out and "ceiling dB" in out
    rows = list(csv.DictReader(target.open()))
    assert rows and rows[0]["modes"].split()[0] == "3"
    assert float(rows[0]["estimated_ceiling_db"]) < 60 and "ceiling_db" not in rows[0]


def test_bad_options_are_one_line(folder, capsys):
    assert main(["scan", str(folder), "--jobs", "0"]) == 2
    assert main(["scan", str(folder), "--transpose", "5"]) == 2
    err = capsys.readouterr().err
    assert "--jobs" in err and "--transpose" in err and "Traceback" not in err


def test_transpose_takes_every_shift_the_scan_may_suggest(tmp_path, capsys):
    """The scan searches shifts within +-TRANSPOSE_RANGE_CENTS and may suggest +3.07 st; --transpose
    refused anything beyond 3 ("must be within -3 and 3 semitones").  Reference: the search's own
    range (showkit.limits.TRANSPOSE_RANGE_CENTS, cents / 100 = semitones)."""
    from showkit.analysis import transpose
    from showkit.limits import TRANSPOSE_RANGE_CENTS

    edge = TRANSPOSE_RANGE_CENTS / 100.0
    assert transpose.TRANSPOSE_RANGE_CENTS is TRANSPOSE_RANGE_CENTS  # one name: the search uses it
    # an empty folder: the shift passes its check and the scan finds nothing to read
    for shift in (3.07, -edge, edge):
        assert main(["scan", str(tmp_path), "--transpose", str(shift)]) == 2
        err = capsys.readouterr().err
        assert "no audio files found" in err and "--transpose" not in err, err
    assert main(["scan", str(tmp_path), "--transpose", str(edge + 0.01)]) == 2
    err = capsys.readouterr().err
    assert f"within -{edge:g} and {edge:g} semitones" in err, err
    with pytest.raises(SystemExit):
        main(["scan", "--help"])
    assert f"-{edge:g} to {edge:g}" in " ".join(capsys.readouterr().out.split())


def test_transpose_writes_a_preview(folder, tmp_path, capsys, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(["scan", str(folder / "good.flac"), "--transpose", "-1"]) == 0
    made = list(tmp_path.glob("good_shift-1.00st_*.wav"))
    assert len(made) == 1 and sf.info(str(made[0])).duration > 4.0


def test_two_tracks_of_one_name_get_two_previews(folder, tmp_path, capsys, monkeypatch):
    # `scan a/t.wav b/t.wav --transpose 1` wrote one preview over the other, keeping no backup
    other = tmp_path / "other"
    other.mkdir()
    (other / "good.flac").write_bytes((folder / "good.flac").read_bytes())
    monkeypatch.chdir(tmp_path)
    assert main(["scan", str(folder / "good.flac"), str(other / "good.flac"), "--transpose", "-1"]) == 0
    made = sorted(p.name for p in tmp_path.glob("good_shift-1.00st_*.wav"))
    assert len(made) == 2 and made[1].endswith("_2.wav"), made


@pytest.mark.parametrize("name", ["=SUM(A1)", "+1", "-x", "@cmd", "plain"])
def test_csv_cells_are_not_formulas(tmp_path, name, capsys):
    # a track named "=..." read as a formula in a spreadsheet (OWASP, "CSV Injection")
    import csv

    from showkit.cli.scan_cmd import _write_csv

    track = {"path": f"{name}.wav", "score": 1.0, "transpose_semitones": 0.0, "transpose_score": 1.0,
             "error": None, "passages": []}
    _write_csv(str(tmp_path / "t.csv"), [track])
    cell = list(csv.reader((tmp_path / "t.csv").open()))[1][0]
    assert cell == (f"{name}.wav" if name == "plain" else f"'{name}.wav")


def test_map_file_is_the_map_as_data(folder, tmp_path, capsys):
    # issue 12: {"hop_s", "times_s", "modes": [{"n", "frequency_hz", "note"}], "strength", "hit", "notes_hz"}
    target = tmp_path / "map.json"
    assert main(["scan", str(folder / "good.flac"), "--map", str(target)]) == 0
    m = json.loads(target.read_text())
    assert set(m) >= {"hop_s", "times_s", "modes", "strength", "hit", "notes_hz"}
    frames = len(m["times_s"])
    assert m["hop_s"] == pytest.approx(1 / 30) and frames == pytest.approx(5.0 * 30, abs=2)
    assert len(m["strength"]) == len(m["hit"]) == len(m["modes"])
    assert all(len(r) == frames for r in m["strength"]) and len(m["notes_hz"]) == frames
    s = np.array(m["strength"])
    assert s.min() >= 0 and s.max() <= 1
    row = next(k for k, md in enumerate(m["modes"]) if md["n"] == 3)
    # the held tone on mode 3 (a single sine: all of the band's sound) is drawn, and only there
    assert np.mean(m["hit"][row][15:-15]) > 0.9 and s[row][15:-15].mean() > 0.8
    others = np.delete(np.array(m["hit"]), row, axis=0)
    assert others.sum(axis=0).mean() < 0.05
    f = synth.DEMO_MODE_HZ[3]
    assert all(any(abs(1200 * np.log2(x / f)) < 5 for x in fr) for fr in m["notes_hz"][15:-15])


def test_map_is_written_when_the_reader_stops_early(folder, tmp_path):
    # `showkit scan TRACK --map F | head`: the pipe is closed before the table is printed; the map
    # asked for is still written (before: the table's broken pipe ended the run first)
    import subprocess
    import sys

    target = tmp_path / "map.json"
    cmd = (f"{sys.executable} -m showkit scan {folder / 'good.flac'} --map {target} | true")
    done = subprocess.run(["bash", "-c", cmd], capture_output=True, text=True, timeout=300,
                          env=dict(os.environ))
    assert "Traceback" not in done.stderr
    assert json.loads(target.read_text())["hop_s"] == pytest.approx(1 / 30)


def test_map_takes_one_track(folder, tmp_path, capsys):
    assert main(["scan", str(folder), "--map", str(tmp_path / "m.json")]) == 2
    assert "one track" in capsys.readouterr().err and not (tmp_path / "m.json").exists()


def test_transpose_column_is_one_format(capsys):
    """Half a semitone and one and a half read the same way in the table (an earlier table
    wrote "+50 c" beside "+1 st +58 c").  Reference: the shift in semitones, rounded to
    the cent (closed form)."""
    from showkit.cli.scan_cmd import _print_table

    def track(name, shift):
        return {"path": name, "duration_s": 10.0, "score": 40.0, "transpose_semitones": shift,
                "transpose_score": 55.0, "error": None, "passages": []}

    _print_table([track("a.wav", 0.5), track("b.wav", 1.58), track("c.wav", -2.0), track("d.wav", 0.0)])
    rows = {line.split()[1]: line for line in capsys.readouterr().out.splitlines()
            if line.split() and line.split()[1].endswith(".wav")}
    assert "+0.50 st -> 55" in rows["a.wav"]
    assert "+1.58 st -> 55" in rows["b.wav"]
    assert "-2.00 st -> 55" in rows["c.wav"]
    assert rows["d.wav"].rstrip().endswith("none")
    assert not any(" c " in r or r.rstrip().endswith(" c") for r in rows.values())


def test_an_error_row_keeps_the_table_narrow(capsys):
    """A track's error went into the transpose column and stretched every row to ~200 characters;
    the column says "error" and the message is on its own line under the table, whole."""
    from showkit.cli.scan_cmd import _print_table

    message = "the file is cut short: its header says 96000 frames, 47989 are there " * 3
    _print_table([{"path": "good.wav", "duration_s": 10.0, "score": 40.0, "transpose_semitones": 0.0,
                   "transpose_score": 40.0, "error": None, "passages": []},
                  {"path": "cut.wav", "duration_s": None, "score": None, "transpose_semitones": None,
                   "transpose_score": None, "error": message, "passages": []}])
    lines = capsys.readouterr().out.splitlines()
    rows = {line.split()[1]: line for line in lines if len(line.split()) > 1 and line.split()[1].endswith(".wav")}
    assert rows["cut.wav"].split()[-1] == "error"
    assert max(len(line) for line in lines[:4]) < 60  # header, rule and the two rows
    assert lines[-1] == f"#2 cut.wav: ERROR: {message}"
    assert sum("ERROR:" in line for line in lines) == 1


def test_one_unreadable_file_is_one_line(tmp_path, capsys):
    """A scan of one file that cannot be read says so in one line on stderr, exit 2, no table (the
    same form as any command); a folder still lists its unreadable files among the rest."""
    bad = tmp_path / "empty.wav"
    bad.write_bytes(b"")
    assert main(["scan", str(bad), "--jobs", "1"]) == 2
    out, err = capsys.readouterr()
    assert out == "" and len(err.strip().splitlines()) == 1
    assert "empty.wav: the file is empty" in err
    assert main(["scan", str(tmp_path), "--jobs", "1"]) == 2
    assert "ERROR" in capsys.readouterr().out


def test_temperature_moves_the_modes_and_the_suggestion(tmp_path, capsys):
    """`scan --temperature`: the map and the suggestion are for today's gas.  Notes written on the
    demo rig's modes at its own 20 C need no shift; at 40 C the modes sit higher by
    1200 log2(sqrt(313.15 / 293.15)) = 57.1 cents (closed form: ideal gas, sound speed ~ sqrt(T),
    DEVELOPERS.md Methods §2; the real-gas model stays within 0.5 %, 9 cents, of it), and the scan
    suggests moving the notes up by that much."""
    import math

    path = tmp_path / "on.flac"
    notes = [(1.8 * k, 1.8, synth.DEMO_MODE_HZ[n], 0.4) for k, n in enumerate((2, 3, 4, 5, 3))]
    sf.write(str(path), synth.notes_track(notes, 9.0), synth.RATE_HZ)
    assert main(["scan", str(path), "--json", "--jobs", "1"]) == 0
    as_filed = json.loads(capsys.readouterr().out)
    assert main(["scan", str(path), "--json", "--jobs", "1", "--temperature", "40 C"]) == 0
    warm = json.loads(capsys.readouterr().out)
    assert as_filed["temperature_k"] == pytest.approx(293.15) and warm["temperature_k"] == pytest.approx(313.15)
    assert as_filed["tracks"][0]["transpose_semitones"] == 0.0
    expected_cents = 1200.0 * math.log2(math.sqrt(313.15 / 293.15))
    assert 100.0 * warm["tracks"][0]["transpose_semitones"] == pytest.approx(expected_cents, abs=15.0)
    assert warm["tracks"][0]["score"] < as_filed["tracks"][0]["score"] - 20
    # the table's last lines name the temperature used; a temperature outside the limits is one line, exit 2
    assert main(["scan", str(path), "--jobs", "1", "--temperature", "40 C"]) == 0
    assert "gas 40.0 C" in capsys.readouterr().out
    assert main(["scan", str(path), "--temperature", "500 C"]) == 2
    err = capsys.readouterr().err
    assert "--temperature" in err and "Traceback" not in err


def test_a_passage_held_on_modes_too_briefly_to_list_says_so():
    """A passage can score above 0 while no mode holds the listing share (score.MIN_MODE_SHARE):
    the modes column says so rather than "none" beside a non-zero score (a fresh user's report)."""
    from showkit.analysis.score import MIN_MODE_SHARE
    from showkit.cli.scan_cmd import _modes_text

    assert MIN_MODE_SHARE == 0.05
    assert _modes_text({"score": 2.7, "modes": [], "mode_shares": []}) == "each <5%"
    assert _modes_text({"score": 0.0, "modes": [], "mode_shares": []}) == "none"
    assert _modes_text({"score": 40.0, "modes": [3], "mode_shares": [{"n": 3, "note": "C4", "share": 0.4}]}) \
        == "n3 C4 40%"


@pytest.mark.parametrize("kind", ["fifo", "missing", "loop", "device"])
def test_one_track_that_is_not_a_file_is_one_line_too(tmp_path, capsys, kind):
    """A pipe, a missing name, a looping link or a device given as the one track: one line on
    stderr and exit 2, as for an unreadable file (a fresh user got the whole table for these)."""
    path = tmp_path / "p.wav"
    if kind == "fifo":
        os.mkfifo(path)
    elif kind == "loop":
        os.symlink(tmp_path / "q.wav", path)
        os.symlink(path, tmp_path / "q.wav")
    elif kind == "device":
        path = "/dev/zero"
    assert main(["scan", str(path), "--jobs", "1"]) == 2
    out, err = capsys.readouterr()
    assert out == "" and len(err.strip().splitlines()) == 1, err
    assert str(path) in err


def test_the_progress_bar_is_drawn_on_a_terminal_only(folder, capsys):
    """Redirected, stderr gets no bar (redrawn with carriage returns it is one unreadable line)."""
    import io

    from showkit.cli.scan_cmd import _Bar

    class Tty(io.StringIO):
        def isatty(self):
            return True

    plain, tty = io.StringIO(), Tty()
    for stream in (plain, tty):
        bar = _Bar(stream)
        bar(1, 3, "a.wav")
        bar.close()
    assert plain.getvalue() == ""
    assert "scanning [" in tty.getvalue() and "1/3 a.wav" in tty.getvalue()
    assert main(["scan", str(folder), "--jobs", "1"]) == 0
    assert "scanning [" not in capsys.readouterr().err


def test_an_error_line_names_the_file_once(capsys):
    """The error's own message begins with the path; the line under the table gives it once."""
    from showkit.cli.scan_cmd import _print_table

    _print_table([{"path": "/music/gone.wav", "duration_s": None, "score": None, "transpose_semitones": None,
                   "transpose_score": None, "error": "/music/gone.wav: no such file -- check the name",
                   "passages": []}])
    lines = capsys.readouterr().out.splitlines()
    assert lines[-1] == "#1 /music/gone.wav: ERROR: no such file -- check the name"


def test_equal_scores_rank_by_what_a_transposition_would_reach():
    """Music off the modes and a drum track both score 0; the music, which a shift would make
    read, ranks first (a fresh user saw drums above tonal pieces at score 0, by file name)."""
    from showkit.analysis.scan import sort_tracks

    def track(path, score, shifted, error=None):
        return {"path": path, "score": score, "transpose_score": shifted, "error": error}

    ranked = sort_tracks([track("a_drums.wav", 0.0, 0.0), track("b_bad.wav", None, None, "cut short"),
                          track("c_chorale.wav", 0.0, 55.0), track("d_reel.wav", 40.0, 40.0)])
    assert [t["path"] for t in ranked] == ["d_reel.wav", "c_chorale.wav", "a_drums.wav", "b_bad.wav"]


def test_scores_equal_as_shown_rank_by_what_a_transposition_would_reach():
    """A fresh user saw drums ("8", 8.0, shift promising 13) above a folk tune ("8", 7.6, shift
    promising 54) and noise ("0", 0.4) above a chorale ("0", 0.0, shift promising 69): the table
    shows whole points, so the tie is taken on what it shows."""
    from showkit.analysis.scan import sort_tracks

    def track(path, score, shifted):
        return {"path": path, "score": score, "transpose_score": shifted, "error": None}

    ranked = sort_tracks([track("drums.wav", 8.0, 13.0), track("folk.wav", 7.6, 54.0),
                          track("noise.wav", 0.4, 0.4), track("bach.wav", 0.0, 69.0), track("haydn.wav", 14.6, 80.0)])
    assert [t["path"] for t in ranked] == ["haydn.wav", "folk.wav", "drums.wav", "bach.wav", "noise.wav"]
