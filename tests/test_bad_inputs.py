"""A corpus of bad inputs: rig files, sheets, audio, options and output paths (issue 14).

Every case runs the command line (``main(argv)`` in this process, under an
alarm so that a hang fails the test instead of stalling it) and asserts:

* no traceback -- ``main`` returns; any exception escaping it fails the case;
* the exit status (2 for a refusal, 0 where the input is odd but fine);
* one printable line per error on stderr, naming what is wrong;
* files the user had are unchanged (sheet, rig, tracks, backups) where the
  case writes;
* no hang: ``signal.alarm`` stops a case after :data:`HANG_S` seconds.

A handful run as subprocesses with a timeout and an address-space limit
(``RLIMIT_AS`` of 2 GB), which asserts the memory bound of the worst inputs:
a memory bomb dies with MemoryError there instead of passing.
"""

from __future__ import annotations

import errno
import os
import shutil
import signal
import struct
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path
from collections.abc import Callable

import numpy as np
import pytest
import soundfile as sf

from showkit.printable import printable

HANG_S = 60
MEMORY_LIMIT_BYTES = 2 << 30
REPO = Path(__file__).resolve().parent.parent

RIG = """name = "Bench tube"
[tube]
length = "1.2 m"
bore = "50 mm"
wall = "2 mm"
[holes]
count = 40
spacing = "25 mm"
first = "0.1 m"
diameter = "1.5 mm"
[gas]
fuel = "propane"
static_pressure = "20 Pa"
[drive]
reference_frequency = "883.1 Hz"  # one the tube's losses cannot move (showkit's own suggestion)
"""

SHEET = """title = "Bad input show"
rig = "rig.toml"
format = 1

[[cue]]
id = "song"
audio = "track.wav"
start = 0.0
end = 1.0
gain = -30.0

[[cue]]
id = "tone"
tone = { frequency = "120 Hz", duration = 1.0 }
gain = -40.0
"""


class Hang(Exception):
    pass


def _alarm(signum, frame):
    raise Hang(f"no answer within {HANG_S} s")


def run_cli(argv, capsys, timeout: int = HANG_S):
    """``(status, stdout, stderr)`` of ``showkit argv`` run in this process, under an alarm."""
    from showkit.cli.main import main

    old = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(timeout)
    try:
        status = main([str(a) for a in argv])
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
    out, err = capsys.readouterr()
    return status, out, err


def error_lines(err: str) -> list[str]:
    return [line for line in err.splitlines() if line.startswith("showkit:")]


def assert_printable(text: str) -> None:
    for line in text.splitlines():
        assert printable(line) == line, f"unprintable output: {line!r}"


# ---------------------------------------------------------------- shared files
def _tone_wav(path: Path, seconds: float = 1.5, rate: int = 48000) -> Path:
    t = np.arange(int(seconds * rate)) / rate
    sf.write(path, 0.3 * np.sin(2 * np.pi * 120.0 * t), rate, subtype="PCM_16")
    return path


@pytest.fixture(scope="module")
def base(tmp_path_factory):
    """A rig, a track and the sheet locked once (its locked text is copied into every case)."""
    from showkit.cli.main import main

    folder = tmp_path_factory.mktemp("bad-inputs-base")
    cache = tmp_path_factory.mktemp("bad-inputs-cache")
    old = os.environ.get("SHOWKIT_CACHE_DIR")
    os.environ["SHOWKIT_CACHE_DIR"] = str(cache)
    try:
        (folder / "rig.toml").write_text(RIG)
        _tone_wav(folder / "track.wav")
        (folder / "show.toml").write_text(SHEET)
        assert main(["lock", str(folder / "show.toml")]) == 0
    finally:
        if old is None:
            os.environ.pop("SHOWKIT_CACHE_DIR", None)
        else:
            os.environ["SHOWKIT_CACHE_DIR"] = old
    return folder


@dataclass
class Env:
    """One case's folder: the locked sheet, its rig and track, copied fresh."""

    dir: Path

    def p(self, name: str) -> Path:
        return self.dir / name

    def write(self, name: str, text: str | bytes) -> Path:
        path = self.dir / name
        path.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(text, bytes):
            path.write_bytes(text)
        else:
            path.write_text(text, encoding="utf-8")
        return path

    def fifo(self, name: str) -> Path:
        path = self.dir / name
        path.parent.mkdir(parents=True, exist_ok=True)
        os.mkfifo(path)
        return path

    def sheet_with(self, name: str, body: str, rig: str = "rig.toml") -> Path:
        return self.write(name, f'title = "x"\nrig = "{rig}"\nformat = 1\n' + body)

    def snapshot(self) -> dict[str, bytes]:
        return {p.name: p.read_bytes() for p in self.dir.iterdir() if p.is_file() and not p.is_symlink()}


@pytest.fixture
def env(base, tmp_path, monkeypatch):
    for name in ("rig.toml", "track.wav", "show.toml"):
        shutil.copy(base / name, tmp_path / name)
    monkeypatch.setenv("SHOWKIT_CACHE_DIR", str(tmp_path / "cache"))
    monkeypatch.setenv("SHOWKIT_DATA_DIR", str(tmp_path / "data"))
    monkeypatch.chdir(tmp_path)
    return Env(tmp_path)


# ---------------------------------------------------------------- the corpus
def _nested(depth: int) -> str:
    return "[" * depth + "]" * depth


def _wav_cut_short(env: Env, name: str = "cut.wav") -> Path:
    """Header says 96 000 frames (16-bit mono), 47 989 are present."""
    full = _tone_wav(env.p("full.wav"), 2.0)
    data = full.read_bytes()
    offset = data.index(b"data") + 8
    return env.write(name, data[:offset + 47989 * 2])


def _wav_claims_4gb(env: Env, name: str = "huge.wav") -> Path:
    data = bytearray(_tone_wav(env.p("small.wav"), 0.5).read_bytes())
    i = data.index(b"data")
    data[i + 4:i + 8] = struct.pack("<I", 0xFFFFFFF0)
    return env.write(name, bytes(data))


def _big_rig(env: Env) -> Path:
    return env.write("big.toml", RIG + "# " + "x" * (2 << 20) + "\n")


def _rig_case(name, make, expect, status=2):
    return Case(f"rig-{name}", lambda e: ["modes", "--rig", make(e)], expect, status)


@dataclass
class Case:
    id: str
    argv: Callable[[Env], list]
    expect: str | None  # a piece of the error line (None: no error expected)
    status: int = 2
    unchanged: tuple = ()  # files whose bytes must not change
    check: Callable[[Env, str, str], None] | None = None
    patch: Callable | None = None  # called with (monkeypatch) before the run


def _enospc(*args, **kwargs):
    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


def _disk_full(monkeypatch):
    """Every fsync and every write through os.write fails as on a full disk."""
    import showkit.safesave as safesave

    monkeypatch.setattr(safesave.os, "fsync", _enospc)


def _no_escape_chars(env, out, err):
    assert "\x1b" not in out + err and "\x07" not in out + err
    assert "\\x1b" in out  # shown, as an escape


def _keeps_form_feed(env, out, err):
    from showkit.show.sheet import load_sheet

    sheet = load_sheet(env.p("ff.toml"))
    assert sheet.cue("t").notes == "form\ffeed\x01"


def _lock_twice(e):
    from showkit.cli.main import main

    path = e.sheet_with("ff.toml", '[[cue]]\nid = "t"\npause = { duration = 1 }\nnotes = "form\\ffeed\\u0001"\n')
    assert main(["lock", str(path)]) == 0
    return ["lock", path]


def _scan_rows(expect_errors: int, expect_ok: int):
    def check(env, out, err):
        assert out.count("ERROR:") == expect_errors
        assert "d/track.wav" in out or "track.wav" in out
        assert_printable(out)
    return check


def _cached_shape(shape):
    def argv(e):
        from showkit.analysis import scancache
        from showkit.analysis.audio import content_hash
        from showkit.rigfile import load_rig

        key = scancache.cache_key(content_hash(e.p("track.wav")), load_rig(e.p("rig.toml")))
        folder = scancache.cache_dir()
        folder.mkdir(parents=True, exist_ok=True)
        import json

        (folder / f"{key}.json").write_text(json.dumps({"version": scancache.cache_version(), "result": shape}))
        return ["scan", e.p("track.wav"), "--rig", e.p("rig.toml"), "--jobs", "1", "--json"]
    return argv


def _scanned_fresh(env, out, err):
    import json

    data = json.loads(out)
    track = data["tracks"][0]
    assert track["error"] is None and track["cached"] is False and track["passages"]


def _no_scan(monkeypatch):
    """The scan fails the case if it starts: an output path is checked before the work."""
    import showkit.analysis.scan as scan

    def scan_paths(*args, **kwargs):
        raise AssertionError("the scan ran before the output path was checked")
    monkeypatch.setattr(scan, "scan_paths", scan_paths)


def _locked_at_ceiling(e):
    """A tone cue whose gain lock clamps to its ceiling, checked at 0.08 inH2O (19.93 Pa, the rig's 20 Pa)."""
    from showkit.cli.main import main

    path = e.sheet_with("hair.toml", '[[cue]]\nid = "t"\ntone = { frequency = "120 Hz", duration = 1.0 }\ngain = 0\n')
    assert main(["lock", str(path)]) == 0
    return ["check", path, "--static", "0.08 inH2O", "--json"]


def _over_by_a_hair(env, out, err):
    """The refusal stands and says by how much, visibly.  Reference (closed form, DEVELOPERS.md Methods §7, §10):
    a pressure-limited ceiling moves by 20 log10(p_today / p_lock) = 20 log10(0.08 x 249.08891 / 20)
    = -0.0317 dB; the lock floors the gain to the 0.01-dB step, so it is over by 0.0217 to 0.0317 dB."""
    import json
    import math
    import re

    cue = json.loads(out)["cues"][0]
    assert cue["status"] == "over"
    moved_db = -20 * math.log10(0.08 * 249.08891 / 20.0)
    assert moved_db - 0.01 - 1e-6 <= -cue["headroom_db"] <= moved_db + 1e-6
    shown = float(re.match(r"gain is ([0-9.]+) dB above today's ceiling", cue["message"]).group(1))
    assert shown == round(-cue["headroom_db"], 2) > 0
    assert "today's static pressure, 19.93 Pa, is lower than at the lock, 20.00 Pa" in cue["message"]
    assert "re-lock" in cue["message"]


def _old_render_kept(*names):
    def check(env, out, err):
        import soundfile as sf

        for name in names:
            assert env.p(name + ".bak").read_bytes() == b"old render", name  # the file replaced, whole
            assert sf.info(str(env.p(name))).frames > 0  # the new render in its place
    return check


def _old_file_kept(name, old, new_starts):
    """The file replaced is kept whole as NAME.bak; the new one starts as it should."""
    def check(env, out, err):
        assert env.p(name + ".bak").read_bytes() == old, name
        assert env.p(name).read_bytes().startswith(new_starts), name
    return check


def _victim_intact(env, out, err):
    assert env.p("victim.txt").read_text() == "precious\n"
    assert env.p("show.toml.bak").is_file() and not env.p("show.toml.bak").is_symlink()


CASES = [
    # ---- rig files (modes --rig)
    _rig_case("fifo", lambda e: e.fifo("r.fifo"), "named pipe"),
    _rig_case("dev-zero", lambda e: "/dev/zero", "character device"),
    _rig_case("dev-urandom", lambda e: "/dev/urandom", "character device"),
    _rig_case("folder", lambda e: e.dir, "folder"),
    _rig_case("missing", lambda e: e.p("nope.toml"), "no such rig file"),
    _rig_case("symlink-to-dev-zero", lambda e: (os.symlink("/dev/zero", e.p("z.toml")), e.p("z.toml"))[1],
              "character device"),
    _rig_case("nested-3000", lambda e: e.write("n.toml", RIG + "x = " + _nested(3000) + "\n"),
              "nest too deeply"),
    _rig_case("nested-40", lambda e: e.write("n.toml", RIG + "x = " + _nested(40) + "\n"), "nest too deeply"),
    _rig_case("over-1-MiB", _big_rig, "more than showkit reads"),
    _rig_case("not-utf8", lambda e: e.write("b.toml", RIG.encode() + b"# \xff\xfe\n"), "not UTF-8"),
    _rig_case("nul-bytes", lambda e: e.write("b.toml", b"\x00" * 64), None),
    _rig_case("syntax", lambda e: e.write("s.toml", "[tube\nlength = 1"), "TOML syntax error"),
    _rig_case("empty", lambda e: e.write("e.toml", ""), "missing field"),
    _rig_case("holes-1e9", lambda e: e.write("h.toml", _rig_text(count_=_rig_count("1000000000"))),
              "more holes than a flame tube has"),
    _rig_case("holes-negative", lambda e: e.write("h.toml", _rig_text(count_=_rig_count("-1"))), "negative"),
    _rig_case("holes-text", lambda e: e.write("h.toml", _rig_text(count_=_rig_count('"many"'))), "whole number"),
    _rig_case("positions-6000", lambda e: e.write(
        "p.toml", RIG.replace('count = 40\nspacing = "25 mm"\nfirst = "0.1 m"\n',
                              "positions = [" + ", ".join(["0.5"] * 6000) + "]\n")), "more holes"),
    _rig_case("unknown-field", lambda e: e.write("u.toml", RIG + "[colour]\nred = 1\n"), "unknown field"),
    _rig_case("length-nan", lambda e: e.write("l.toml", RIG.replace('"1.2 m"', "nan")), None),
    Case("rig-name-escapes", lambda e: ["modes", "--rig", e.write(
        "esc.toml", RIG.replace('"Bench tube"', '"Tube\\u001b]0;title\\u0007\\u001b[2J"'))],
        None, 0, check=_no_escape_chars),
    # ---- sheets (check / lock)
    Case("sheet-fifo", lambda e: ["check", e.fifo("s.fifo")], "named pipe"),
    Case("sheet-dev-zero", lambda e: ["check", "/dev/zero"], "character device"),
    Case("sheet-folder", lambda e: ["check", e.dir], "folder"),
    Case("sheet-missing", lambda e: ["check", e.p("none.toml")], "no such cue sheet"),
    Case("sheet-nested-3000", lambda e: ["check", e.sheet_with("n.toml", "notes2 = " + _nested(3000) + "\n")],
         "nest too deeply"),
    Case("sheet-over-limit", lambda e: ["check", e.write("big.toml", SHEET + "#" + "y" * (33 << 20) + "\n")],
         "more than showkit reads"),
    Case("sheet-not-utf8", lambda e: ["check", e.write("b.toml", SHEET.encode() + b"# \xc3\x28\n")], "not UTF-8"),
    Case("sheet-rig-fifo", lambda e: (e.fifo("r.fifo"), ["check", e.sheet_with(
        "s.toml", '[[cue]]\nid = "p"\npause = { duration = 1 }\n', rig="r.fifo")])[1], "named pipe"),
    Case("sheet-rig-dev-zero", lambda e: ["check", e.sheet_with(
        "s.toml", '[[cue]]\nid = "p"\npause = { duration = 1 }\n', rig="/dev/zero")], "character device"),
    # a rig given where a sheet goes said "unknown field 'name'": every command taking a sheet names it a rig
    *[Case(f"rig-as-sheet-{argv[0]}", lambda e, argv=argv: [argv[0], e.p("rig.toml"), *[
        e.p(a) if a.startswith("out.") else a for a in argv[1:]]],
        "rig.toml: this is a rig file, not a cue sheet -- give the cue sheet; a sheet names its rig in its `rig = ",
        unchanged=("rig.toml",))
      for argv in (["lock"], ["check"], ["render", "-o", "out.wav"], ["run", "--auto"], ["book", "-o", "out.pdf"],
                   ["preview", "-o", "out.mp4"])],
    Case("tone-8h20", lambda e: ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "t"\ntone = { frequency = 100, duration = "8:20:00" }\n')],
        "longer than showkit makes", unchanged=("s.toml",)),
    Case("tone-1e9", lambda e: ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "t"\ntone = { frequency = 100, duration = 1e9 }\n')], "longer than showkit makes"),
    Case("pause-inf", lambda e: ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "t"\npause = { duration = inf }\n')], "finite"),
    Case("glide-nan", lambda e: ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "t"\nglide = { from_frequency = 100, to_frequency = 200, duration = nan }\n')],
        "finite"),
    Case("glide-16min", lambda e: ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "t"\nglide = { from_frequency = 100, to_frequency = 200, duration = "16:00" }\n')],
        "longer than showkit makes"),
    Case("fade-1e300", lambda e: ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "t"\npause = { duration = 1 }\nfade_in = 1e300\n')], "fades"),
    Case("audio-start-inf", lambda e: ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "a"\naudio = "track.wav"\nstart = inf\n')], "finite"),
    # float("-0") is -0.0, not below zero: "-0:01" was read as +1 s and the cue locked 0:01-0:10
    Case("audio-start-minus-m-ss", lambda e: ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "a"\naudio = "track.wav"\nstart = "-0:01"\n')], "cue a: start: '-0:01' has a sign",
        unchanged=("s.toml",)),
    # a gain locked at its ceiling is over by 0.03 dB at 19.93 Pa: the table read -32.4 / -32.4 and said not why
    Case("over-by-a-rounding-hair", _locked_at_ceiling, None, 2, check=_over_by_a_hair),
    Case("cues-2001", lambda e: ["check", e.sheet_with(
        "s.toml", "".join(f'[[cue]]\nid = "p{k}"\npause = {{ duration = 1 }}\n' for k in range(2001)))],
        "more than showkit runs"),
    Case("cue-id-escapes", lambda e: ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "x\\u001b[2J\\u0007\\u009b"\nlabel = "\\u001b]0;t\\u0007"\npause = { duration = 1 }\n')],
        None, 0, check=_no_escape_chars),
    Case("cue-audio-fifo", lambda e: (e.fifo("f.wav"), ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "a"\naudio = "f.wav"\n')])[1], "named pipe", unchanged=("s.toml",)),
    Case("cue-audio-dev-zero", lambda e: ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "a"\naudio = "/dev/zero"\n')], "character device"),
    Case("cue-audio-link-to-dev-zero", lambda e: (os.symlink("/dev/zero", e.p("z.wav")), ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "a"\naudio = "z.wav"\n')])[1], "character device"),
    Case("cue-audio-cut-short", lambda e: (_wav_cut_short(e), ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "a"\naudio = "cut.wav"\n')])[1], "cut short", unchanged=("s.toml",)),
    Case("cue-audio-claims-4gb", lambda e: (_wav_claims_4gb(e), ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "a"\naudio = "huge.wav"\n')])[1], "cut short"),
    Case("form-feed-notes-round-trip", _lock_twice, None, 0, check=_keeps_form_feed),
    Case("sheet-format-99", lambda e: ["check", e.write("f.toml", SHEET.replace("format = 1", "format = 99"))],
         "newer than"),
    # ---- audio (ceiling, scan)
    Case("ceiling-start-minus-m-ss", lambda e: ["ceiling", e.p("track.wav"), "--start=-0:01"], "--start: '-0:01' has a sign"),
    Case("audio-fifo", lambda e: ["ceiling", e.fifo("x.wav")], "named pipe"),
    Case("open-audio-fifo", lambda e: ["open", e.fifo("o.wav")], "named pipe"),  # said "no such audio file"
    # a text file named .wav opened the UI and wrote a sheet for it (a fresh user's report)
    Case("open-text-as-audio", lambda e: ["open", e.write("notes.wav", "not audio\n")], "not an audio file",
         check=lambda e, out, err: not (__import__("showkit.folders").folders.data_dir() / "shows"
                                        / "notes.toml").exists() or pytest.fail("a sheet was written")),
    Case("audio-dev-zero", lambda e: ["ceiling", "/dev/zero"], "character device"),
    Case("audio-folder", lambda e: ["ceiling", e.dir], "folder"),
    Case("audio-cut-short", lambda e: ["ceiling", _wav_cut_short(e)], "header says 96000 frames"),
    Case("audio-claims-4gb", lambda e: ["ceiling", _wav_claims_4gb(e)], "cut short"),
    Case("audio-text", lambda e: ["ceiling", e.write("t.wav", "not audio\n")], "not an audio file"),
    Case("audio-empty", lambda e: ["ceiling", e.write("e.wav", b"")], "empty"),
    Case("audio-rate-too-high", lambda e: ["ceiling", e.write("r.wav", _rate_header(20_000_000))], None),
    # a 2-s file whose header says 1 Hz read as 27 hours and ran away (8 GB) before the rate floor
    Case("audio-rate-1hz", lambda e: ["ceiling", e.write("r1.wav", _rate_header(1, 96_000))], "below showkit's limit"),
    Case("scan-rate-1hz", lambda e: ["scan", e.write("r1.wav", _rate_header(1, 96_000)), "--jobs", "1"], None, 2,
         check=lambda e, out, err: ("below showkit's limit" in out + err) or pytest.fail(out + err)),
    # libsndfile refuses a 4-GHz header with "SF_INFO struct incomplete"; the header itself says why
    Case("audio-rate-4ghz", lambda e: ["ceiling", e.write("r4.wav", _rate_header(4_000_000_000))],
         "says a sample rate of 4000000000 Hz"),
    Case("audio-one-sample", lambda e: ["ceiling", e.write("one.wav", _rate_header(48_000, 1))], "ms long"),
    Case("scan-dev-zero", lambda e: ["scan", "/dev/zero", "--jobs", "1"], "character device"),
    # session 12's attack: a float file at 1e19 overflowed the scan's squares (exit 0, warnings, score 0)
    # and at 3e38 made a NaN swing blamed on the rig; beyond +60 dB over full scale it is not audio
    Case("audio-float-1e19", lambda e: ["ceiling", _float_wav(e, "loud.wav", 1e19)], "times full scale"),
    Case("scan-float-3e38", lambda e: ["scan", _float_wav(e, "loud.wav", 3e38), "--jobs", "1"], "times full scale"),
    # 8 times full scale is an unfinished mix, not damage: read
    Case("audio-float-8x", lambda e: ["ceiling", _float_wav(e, "hot.wav", 8.0)], None, 0),
    # a passage shorter than the shortest audio: +60 dB "set by the cap" on no samples, a "truncated"
    # file, an empty video
    Case("ceiling-passage-10us", lambda e: ["ceiling", e.p("track.wav"), "--start", "0", "--end", "0.00001"],
         "ms long (shortest: 0.02 s)"),
    Case("ceiling-passage-at-the-end", lambda e: ["ceiling", e.p("track.wav"), "--start", "1.49999"],
         "ms long (shortest: 0.02 s)"),
    Case("preview-passage-at-the-end", lambda e: ["preview", e.p("track.wav"), "-o", e.p("p.mp4"),
                                                  "--start", "1.4999"], "ms long (shortest: 0.02 s)",
         check=lambda e, out, err: not e.p("p.mp4").exists() or pytest.fail("a video was written")),
    Case("ceiling-end-just-past", lambda e: ["ceiling", e.p("track.wav"), "--end", "0:01.50001"],
         "end 1.50001 s is past the end of the track (1.5 s)"),
    # random bytes named .wav: libsndfile's "File does not exist ... (possibly a pipe?)" and the mp3
    # decoder's own stderr line stood beside showkit's line
    Case("audio-random-bytes", lambda e: ["ceiling", _mpeg_like_bytes(e)], "its format is not recognised"),
    # two outputs on one path: the second replaced the first, kept only as a backup
    Case("scan-map-and-csv-one-file", lambda e: ["scan", e.p("track.wav"), "--map", e.p("same.out"),
                                                 "--csv", e.p("same.out")], "name the same file",
         check=lambda e, out, err: not e.p("same.out").exists() or pytest.fail("written")),
    Case("scan-plot-and-map-one-file", lambda e: ["scan", e.p("track.wav"), "--plot", e.p("o.png"),
                                                  "--map", str(e.dir / "." / "o.png")], "name the same file"),
    # cut inside its header the file read as "only 1.3 ms long", not as cut short (a fresh user's report)
    Case("audio-cut-in-header", lambda e: ["ceiling", e.write("h.wav", e.p("track.wav").read_bytes()[:100])],
         "cut short"),
    Case("scan-cut-in-header", lambda e: ["scan", e.write("h.wav", e.p("track.wav").read_bytes()[:100]),
                                          "--jobs", "1"], "cut short"),
    Case("scan-folder-with-fifo-and-device-link", lambda e: (
        shutil.copy(e.p("track.wav"), e.p("d/track.wav")) if e.p("d").mkdir() is None else None,
        e.fifo("d/x.wav"), os.symlink("/dev/zero", e.p("d/z.wav")),
        ["scan", e.p("d"), "--jobs", "1"])[-1], None, 0, check=_scan_rows(2, 1)),
    Case("scan-cache-list", _cached_shape([1, 2, 3]), None, 0, check=_scanned_fresh),
    Case("scan-cache-missing-keys", _cached_shape({"score": 5.0}), None, 0, check=_scanned_fresh),
    Case("scan-cache-bad-passages", _cached_shape({
        "path": "t", "duration_s": 1.0, "score": 9.0, "transpose_semitones": 0, "transpose_score": 9.0,
        "error": None, "passages": [{"start_s": "0", "modes": None}]}), None, 0, check=_scanned_fresh),
    # ---- options
    # argparse printed the top-level usage ("showkit [-h] [--version] COMMAND ...") for a subcommand's typo
    Case("unknown-option-scan", lambda e: ["scan", e.p("track.wav"), "--bogus"],
         "scan: unrecognized option: --bogus -- see `showkit scan --help`"),
    Case("unknown-option-measure-sweep", lambda e: ["measure", "sweep", "--out", e.p("s.wav"), "--frob", "3"],
         "measure sweep: unrecognized arguments: --frob 3 -- see `showkit measure sweep --help`"),
    Case("unknown-option-top", lambda e: ["--bogus"], "unrecognized option: --bogus -- see `showkit --help`"),
    # argparse printed its usage block (five lines for scan) above the error
    Case("missing-argument-scan", lambda e: ["scan"],
         "scan: the following arguments are required: PATH -- see `showkit scan --help`"),
    Case("option-without-value", lambda e: ["scan", e.p("track.wav"), "--jobs"],
         "scan: argument -j/--jobs: expected one argument"),
    Case("option-bad-int", lambda e: ["scan", e.p("track.wav"), "--jobs", "two"], "invalid int value: 'two'"),
    Case("unknown-command", lambda e: ["frob"], "invalid choice: 'frob'"),
    Case("unknown-measure-step", lambda e: ["measure", "fit"], "measure: argument STEP: invalid choice: 'fit'"),
    # a zero for the O: the units were listed, with no near-name hint as field typos get (difflib)
    Case("unit-typo-inH20", lambda e: ["check", e.p("show.toml"), "--static", "0.08 inH20"],
         "unknown pressure unit 'inH20' in '0.08 inH20' -- did you mean 'inH2O'?"),
    Case("unit-typo-in-rig", lambda e: ["modes", "--rig", e.write("t.toml", RIG.replace('"1.2 m"', '"4 fet"'))],
         "unknown length unit 'fet' in '4 fet' -- did you mean 'feet'?"),
    Case("max-frequency-negative", lambda e: ["modes", "--max-frequency=-5"], "--max-frequency"),
    Case("max-frequency-nan", lambda e: ["modes", "--max-frequency", "nan"], "--max-frequency"),
    Case("max-frequency-inf", lambda e: ["modes", "--max-frequency", "inf"], "--max-frequency"),
    Case("sweep-rate-20M", lambda e: ["measure", "sweep", "--out", e.p("s.wav"), "--rate", "20000000",
                                      "--length", "60"], "sample rate"),
    Case("sweep-rate-100", lambda e: ["measure", "sweep", "--out", e.p("s.wav"), "--rate", "100"], "sample rate"),
    Case("sweep-length-nan", lambda e: ["measure", "sweep", "--out", e.p("s.wav"), "--length", "nan"], "finite"),
    Case("sweep-too-many-samples", lambda e: ["measure", "sweep", "--out", e.p("s.wav"), "--rate", "384000",
                                              "--length", "600"], "more than showkit makes"),
    Case("scan-jobs-0", lambda e: ["scan", e.p("track.wav"), "--jobs", "0"], "--jobs"),
    Case("run-log-fifo", lambda e: ["run", e.p("show.toml"), "--auto", "--log", e.fifo("l.fifo")],
         "not a regular file"),
    Case("run-log-folder", lambda e: ["run", e.p("show.toml"), "--auto", "--log", e.dir], "folder"),
    Case("run-log-is-the-sheet", lambda e: ["run", e.p("show.toml"), "--auto", "--log", e.p("show.toml")],
         "cue sheet itself", unchanged=("show.toml",)),
    Case("run-log-is-the-rig", lambda e: ["run", e.p("show.toml"), "--auto", "--log", e.p("rig.toml")],
         "rig file", unchanged=("rig.toml",)),
    # ---- output paths
    Case("render-o-folder", lambda e: ["render", e.p("show.toml"), "-o", e.dir], "folder"),
    Case("render-o-proc", lambda e: ["render", e.p("show.toml"), "-o", "/proc/x.wav"], "cannot write"),
    Case("render-per-cue-file", lambda e: ["render", e.p("show.toml"), "--per-cue", e.p("rig.toml")],
         "needs a folder", unchanged=("rig.toml",)),
    Case("render-o-source-track", lambda e: ["render", e.p("show.toml"), "-o", e.p("track.wav")],
         "source audio of cue song", unchanged=("track.wav", "show.toml")),
    Case("render-o-sheet", lambda e: ["render", e.p("show.toml"), "-o", e.p("show.toml")],
         "cue sheet itself", unchanged=("show.toml",)),
    Case("render-o-rig", lambda e: ["render", e.p("show.toml"), "-o", e.p("rig.toml")],
         "rig file", unchanged=("rig.toml",)),
    Case("render-o-missing-folder", lambda e: ["render", e.p("show.toml"), "-o", e.p("no/such/x.wav")],
         "does not exist"),
    Case("render-o-fifo", lambda e: ["render", e.p("show.toml"), "-o", e.fifo("o.wav")], "not a regular file"),
    Case("sweep-out-folder", lambda e: ["measure", "sweep", "--out", e.dir], "folder"),
    Case("sweep-out-rig", lambda e: ["measure", "sweep", "--rig", e.p("rig.toml"), "--out", e.p("rig.toml")],
         "rig file", unchanged=("rig.toml",)),
    Case("scan-csv-over-track", lambda e: ["scan", e.p("track.wav"), "--jobs", "1", "--csv", e.p("track.wav")],
         "file being scanned", unchanged=("track.wav",)),
    Case("scan-csv-folder", lambda e: ["scan", e.p("track.wav"), "--jobs", "1", "--csv", e.dir], "folder"),
    # a track found in a folder given was refused only after the whole scan, saying "the show reads this file"
    Case("scan-csv-over-track-in-folder", lambda e: ["scan", e.dir, "--jobs", "1", "--csv", e.p("track.wav")],
         "over a file being scanned -- give another file name, e.g. ", unchanged=("track.wav",), patch=_no_scan,
         check=lambda e, out, err: ("track.csv: the scan reads this file" in err) or pytest.fail(err)),
    Case("scan-map-over-track-in-folder", lambda e: ["scan", e.dir, "--jobs", "1", "--map", e.p("track.wav")],
         "file being scanned", unchanged=("track.wav",), patch=_no_scan),
    # --plot was checked only after the whole scan (review)
    Case("scan-plot-over-track-in-folder", lambda e: ["scan", e.dir, "--jobs", "1", "--plot", e.p("track.wav")],
         "file being scanned", unchanged=("track.wav",), patch=_no_scan),
    Case("scan-csv-folder-names-csv", lambda e: ["scan", e.p("track.wav"), "--jobs", "1", "--csv", e.dir], "out.csv",
         patch=_no_scan),
    # the project's save rule (temp file, fsync, atomic rename, a backup): a render kept no backup
    Case("render-o-keeps-a-backup", lambda e: (e.write("out.wav", b"old render"),
                                              ["render", e.p("show.toml"), "-o", e.p("out.wav")])[-1],
         None, 0, check=_old_render_kept("out.wav")),
    Case("render-per-cue-keeps-backups", lambda e: (e.write("d/01-song.wav", b"old render"),
                                                   ["render", e.p("show.toml"), "--per-cue", e.p("d")])[-1],
         None, 0, check=_old_render_kept("d/01-song.wav")),
    # the same rule for the scan's CSV and map (they replaced an older one with no copy)
    Case("scan-csv-keeps-a-backup", lambda e: (e.write("out.csv", b"old csv"), [
        "scan", e.p("track.wav"), "--jobs", "1", "--csv", e.p("out.csv")])[-1],
         None, 0, check=_old_file_kept("out.csv", b"old csv", b"path,track_score,")),
    Case("scan-map-keeps-a-backup", lambda e: (e.write("m.json", b"old map"), [
        "scan", e.p("track.wav"), "--jobs", "1", "--map", e.p("m.json")])[-1],
         None, 0, check=_old_file_kept("m.json", b"old map", b"{")),
    Case("lock-backup-symlink", lambda e: (e.write("victim.txt", "precious\n"),
                                           os.symlink(e.p("victim.txt"), e.p("show.toml.bak")),
                                           ["lock", e.p("show.toml")])[-1], None, 0, check=_victim_intact),
    # ---- disk full (ENOSPC): one line, exit 2, nothing that existed changed
    Case("disk-full-lock", lambda e: (shutil.copy(e.p("show.toml"), e.p("show.toml.bak")),
                                      ["lock", e.p("show.toml")])[-1],
         "disk is full", unchanged=("show.toml", "show.toml.bak"), patch=_disk_full),
    Case("disk-full-scan-csv", lambda e: (e.write("scan.csv", "old,csv\n" * 2000),
                                          ["scan", e.p("track.wav"), "--jobs", "1", "--csv", e.p("scan.csv")])[-1],
         "disk is full", unchanged=("scan.csv",), patch=_disk_full),
    Case("disk-full-render", lambda e: (e.write("out.wav", b"old render"),
                                        ["render", e.p("show.toml"), "-o", e.p("out.wav")])[-1],
         "disk is full", unchanged=("out.wav",), patch=_disk_full),
    Case("disk-full-update-rig", lambda e: ["measure", "level", "--rig", e.p("rig.toml"), "--pressure", "5 Pa",
                                            "--temperature", "20 C", "--update-rig"],
         "disk is full", unchanged=("rig.toml",), patch=_disk_full),
    Case("disk-full-sweep", lambda e: (e.write("s.wav", b"old sweep"),
                                       ["measure", "sweep", "--out", e.p("s.wav"), "--length", "2"])[-1],
         "disk is full", unchanged=("s.wav",), patch=_disk_full),
]


def _mpeg_like_bytes(env: Env) -> Path:
    """100 kB of random bytes named .wav that start on an MPEG frame sync (0xFFE4), so libsndfile's mp3
    decoder probes them and prints its own line on standard error."""
    return env.write("g.wav", np.random.default_rng(1).bytes(100_000))


def _float_wav(env: Env, name: str, amplitude: float) -> Path:
    """A 0.5-s 228-Hz sine of the given amplitude as a 32-bit float WAV (float files can hold any value)."""
    t = np.arange(24000) / 48000.0
    path = env.dir / name
    sf.write(str(path), (amplitude * np.sin(2 * np.pi * 228.0 * t)).astype(np.float32), 48000, subtype="FLOAT")
    return path


def _rig_count(value: str) -> str:
    return f"count = {value}"


def _rig_text(count_: str | None = None) -> str:
    """The rig with its ``count = 40`` line replaced."""
    return RIG.replace("count = 40", count_) if count_ else RIG


def _rate_header(rate: int, frames: int = 100) -> bytes:
    """A 16-bit mono WAV of ``frames`` frames whose header says ``rate`` Hz."""
    data = np.zeros(frames, "<i2").tobytes()
    fmt = struct.pack("<HHIIHH", 1, 1, rate, min(rate * 2, 2 ** 32 - 1), 2, 16)
    return (b"RIFF" + struct.pack("<I", 4 + 8 + len(fmt) + 8 + len(data)) + b"WAVE"
            + b"fmt " + struct.pack("<I", len(fmt)) + fmt + b"data" + struct.pack("<I", len(data)) + data)


def test_the_corpus_is_large_enough():
    assert len(CASES) >= 60
    assert len({c.id for c in CASES}) == len(CASES)


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_bad_input(case: Case, env: Env, capsys, monkeypatch):
    argv = case.argv(env)
    before = {name: env.p(name).read_bytes() for name in case.unchanged}
    capsys.readouterr()
    if case.patch is not None:
        case.patch(monkeypatch)
    status, out, err = run_cli(argv, capsys)
    assert "Traceback" not in err
    assert status == case.status, f"exit {status}: {err}"
    lines = error_lines(err)
    if case.status == 2 and case.check is None or case.expect is not None:
        assert len(lines) == 1, err
        assert printable(lines[0]) == lines[0]
        if case.expect:
            assert case.expect in lines[0], lines[0]
    assert_printable(out)
    assert_printable(err)
    for name, data in before.items():
        assert env.p(name).read_bytes() == data, f"{name} was changed"
    leftovers = [p.name for p in env.dir.iterdir() if p.name.startswith(".") and ".tmp" in p.name]
    assert not leftovers
    if case.check is not None:
        case.check(env, out, err)


# ---------------------------------------------------------------- a real full disk
@pytest.fixture
def small_disk(tmp_path):
    """A 1 MB tmpfs (needs root and mount rights; skipped where it cannot be mounted)."""
    mnt = tmp_path / "small"
    mnt.mkdir()
    if os.geteuid() != 0 or shutil.which("mount") is None:
        pytest.skip("mounting a tmpfs needs root")
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=1m", "tmpfs", str(mnt)], capture_output=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a tmpfs here: {done.stderr.decode(errors='replace').strip()}")
    try:
        yield mnt
    finally:
        subprocess.run(["umount", str(mnt)], capture_output=True)


def test_a_real_full_disk_leaves_the_old_files_whole(small_disk, base, tmp_path, capsys, monkeypatch):
    for name in ("rig.toml", "track.wav", "show.toml"):
        shutil.copy(base / name, small_disk / name)
    monkeypatch.setenv("SHOWKIT_CACHE_DIR", str(tmp_path / "cache"))
    old_render = small_disk / "out.wav"
    old_render.write_bytes(b"an earlier render")
    sheet = small_disk / "show.toml"
    shutil.copy(sheet, small_disk / "show.toml.bak")
    before = {p.name: p.read_bytes() for p in small_disk.iterdir()}
    filler = small_disk / "filler"
    fd = os.open(filler, os.O_WRONLY | os.O_CREAT)
    try:  # fill the disk to the last byte
        for block in (65536, 4096, 1):
            try:
                while True:
                    os.write(fd, b"\0" * block)
            except OSError as exc:
                assert exc.errno == errno.ENOSPC
    finally:
        os.close(fd)
    status, out, err = run_cli(["render", sheet, "-o", old_render], capsys)
    assert status == 2 and "Traceback" not in err
    assert len(error_lines(err)) == 1 and "disk is full" in error_lines(err)[0]
    status, out, err = run_cli(["lock", sheet], capsys)
    assert status == 2 and "Traceback" not in err
    assert len(error_lines(err)) == 1 and "disk is full" in error_lines(err)[0]
    assert {p.name: p.read_bytes() for p in small_disk.iterdir() if p != filler} == before
    filler.unlink()  # room again: the same commands now work
    assert run_cli(["lock", sheet], capsys)[0] == 0
    assert (small_disk / "show.toml.bak").read_bytes() == before["show.toml"]
    assert run_cli(["render", sheet, "-o", old_render], capsys)[0] == 0
    assert sf.info(str(old_render)).frames > 0
    assert not [p.name for p in small_disk.iterdir() if p.name.startswith(".")]


# ---------------------------------------------------------------- subprocesses: hangs and memory
def _limit_memory():
    import resource

    resource.setrlimit(resource.RLIMIT_AS, (MEMORY_LIMIT_BYTES, MEMORY_LIMIT_BYTES))


SUBPROCESS_CASES = {
    "modes-rig-fifo": lambda e: ["modes", "--rig", e.fifo("r.fifo")],
    "check-sheet-fifo": lambda e: ["check", e.fifo("s.fifo")],
    "check-dev-zero": lambda e: ["check", "/dev/zero"],
    "run-log-fifo": lambda e: ["run", e.p("show.toml"), "--auto", "--log", e.fifo("l.fifo")],
    "tone-8h20-lock": lambda e: ["lock", e.sheet_with(
        "s.toml", '[[cue]]\nid = "t"\ntone = { frequency = 100, duration = "8:20:00" }\n')],
    "holes-1e9": lambda e: ["modes", "--rig", e.write("h.toml", RIG.replace("count = 40", "count = 1000000000"))],
    "sweep-20MHz": lambda e: ["measure", "sweep", "--out", e.p("s.wav"), "--rate", "20000000", "--length", "60"],
    "ceiling-rate-1hz": lambda e: ["ceiling", e.write("r1.wav", _rate_header(1, 96_000))],
    "scan-fifo-in-folder": lambda e: (e.p("d").mkdir(), e.fifo("d/x.wav"), os.symlink("/dev/zero", e.p("d/z.wav")),
                                      ["scan", e.p("d"), "--jobs", "1"])[-1],
}


@pytest.mark.parametrize("name", sorted(SUBPROCESS_CASES))
def test_bad_input_in_a_subprocess_neither_hangs_nor_exhausts_memory(name, env):
    argv = [sys.executable, "-m", "showkit", *map(str, SUBPROCESS_CASES[name](env))]
    environ = dict(os.environ, PYTHONPATH=str(REPO))
    done = subprocess.run(argv, capture_output=True, timeout=HANG_S, preexec_fn=_limit_memory,
                          stdin=subprocess.DEVNULL, env=environ, cwd=env.dir)
    err = done.stderr.decode("utf-8", "replace")
    assert done.returncode == 2, err
    assert "Traceback" not in err and "MemoryError" not in err
    if name.startswith("scan"):  # a scan reports each file in its row and goes on
        out = done.stdout.decode("utf-8", "replace")
        assert out.count("ERROR:") == 2 and "named pipe" in out and "character device" in out
        assert_printable(out)
    else:
        assert len(error_lines(err)) == 1 and printable(error_lines(err)[0]) == error_lines(err)[0]


# ---------------------------------------------------------------- cosmetics a new user met
def test_one_cue_is_singular_and_a_reading_has_two_decimals(env, capsys):
    """"(1 cues: 1 ok)" read wrong and the pre-show line said "static 19.9271 Pa": one cue is "1 cue",
    a pressure reading is shown to 0.01 Pa.  Reference: 0.08 inH2O = 0.08 x 249.08891 Pa = 19.927 Pa
    (DEVELOPERS.md Methods §10)."""
    from showkit.show import render

    path = env.sheet_with("one.toml", '[[cue]]\nid = "p"\npause = { duration = 1 }\n')
    assert run_cli(["lock", path], capsys)[0] == 0
    status, out, err = run_cli(["check", path, "--static", "0.08 inH2O"], capsys)
    assert status == 0, err
    assert out.splitlines()[0] == "x: 1 cue on Bench tube, static 19.93 Pa, gas 20.0 C, reserve 0.25"
    _, problems = render.render_for_playback(path, static_pa=0.08 * 249.08891)
    assert problems[0].startswith("pre-show check: static 19.93 Pa, ")


def test_a_calibration_refusal_names_the_mode_as_modes_lists_it(env, capsys):
    """A reference on a resonance was refused "near mode 3 (171.9 Hz)" (the still-gas member's mode)
    while `showkit modes` listed mode 3 at 156.3 Hz.  Reference: `showkit modes --json` on the same
    tube (the best estimate's modes, the ones every other screen lists)."""
    import json

    status, out, _ = run_cli(["modes", "--rig", env.p("rig.toml"), "--json"], capsys)
    assert status == 0
    mode = next(m for m in json.loads(out)["modes"] if m["n"] == 3)
    on_mode = env.write("on.toml", RIG.replace('"883.1 Hz"', f'"{mode["frequency_hz"]:.1f} Hz"'))
    status, _, err = run_cli(["modes", "--rig", on_mode], capsys)
    assert status == 2
    assert f"lies near mode 3 ({mode['frequency_hz']:.1f} Hz)" in err, err


def test_random_bytes_give_one_line_on_standard_error(env):
    # the file descriptor, not Python's sys.stderr: the mp3 decoder inside libsndfile wrote
    # "[src/libmpg123/parse.c:skip_junk():1260] error: Giving up ..." there before showkit's line
    bad = _mpeg_like_bytes(env)
    done = subprocess.run([sys.executable, "-m", "showkit", "scan", str(bad), "--jobs", "1"], capture_output=True,
                          text=True, timeout=HANG_S, env=dict(os.environ, PYTHONPATH=str(REPO),
                                                              SHOWKIT_CACHE_DIR=str(env.dir / "cache")))
    assert done.returncode == 2
    assert done.stderr.count("\n") == 1 and "its format is not recognised" in done.stderr, done.stderr


@pytest.mark.parametrize("argv", [["modes"], ["ceiling", "track.wav", "--json"]])
def test_a_full_standard_output_is_one_line(env, argv):
    # `showkit modes > /dev/full` ended in an OSError traceback (exit 1)
    with open("/dev/full", "w") as full:
        done = subprocess.run([sys.executable, "-m", "showkit", *argv], stdout=full, stderr=subprocess.PIPE,
                              text=True, timeout=HANG_S, cwd=env.dir,
                              env=dict(os.environ, PYTHONPATH=str(REPO), SHOWKIT_CACHE_DIR=str(env.dir / "cache")))
    lines = [ln for ln in done.stderr.splitlines() if not ln.startswith("CAUTION")]
    assert done.returncode == 2 and "Traceback" not in done.stderr
    assert lines == ["showkit: standard output cannot be written (No space left on device) -- free some disk "
                     "space, or send the output to another file"], done.stderr


def test_a_closed_standard_output_is_no_traceback(env):
    # `showkit modes >&-`: sys.stdout is None; the guard on standard output must not wrap it
    done = subprocess.run([sys.executable, "-m", "showkit", "modes"], stdout=subprocess.DEVNULL,
                          stderr=subprocess.PIPE, text=True, timeout=HANG_S, cwd=env.dir,
                          env=dict(os.environ, PYTHONPATH=str(REPO)), close_fds=True,
                          preexec_fn=lambda: os.close(1))
    assert done.returncode == 0 and "Traceback" not in done.stderr, done.stderr


def test_the_table_is_printed_when_the_map_cannot_be_written(env, capsys, monkeypatch):
    # the outputs are written before the table (for `| head`); one that fails is said after it
    from showkit.cli import scan_cmd

    def refuse(*args, **kwargs):
        from showkit.errors import OutputError
        raise OutputError("the disk is full", "m.json", "free some disk space")

    monkeypatch.setattr(scan_cmd, "_write_map", refuse)
    status, out, err = run_cli(["scan", env.p("track.wav"), "--map", env.p("m.json")], capsys)
    assert status == 2 and "track.wav" in out and error_lines(err) == ["showkit: m.json: the disk is full -- free some disk space"]


def test_silencing_the_c_libraries_leaves_standard_error_as_it_was():
    # two threads probing at once left descriptor 2 on the null device for good (a review's find):
    # one probe at a time, and standard error is the same file after them all
    import threading

    from showkit.fileio import quiet_native_probes, quiet_native_stderr

    before = os.fstat(2)
    inside = []

    def probe():
        with quiet_native_stderr():
            inside.append(os.fstat(2).st_rdev == os.stat(os.devnull).st_rdev)

    quiet_native_probes(True)
    try:
        threads = [threading.Thread(target=probe) for _ in range(8)]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
    finally:
        quiet_native_probes(False)
    after = os.fstat(2)
    assert inside == [True] * 8
    assert (after.st_dev, after.st_ino) == (before.st_dev, before.st_ino)
    with quiet_native_stderr():          # off (the terminal UI): nothing is touched
        assert (os.fstat(2).st_dev, os.fstat(2).st_ino) == (before.st_dev, before.st_ino)
