"""Rank tracks and their passages by how well they read in the flames of this tube.

Each track is cut into passages where the music changes character; each
passage gets a 0-100 readability score (the share of its time during which a
note is held on a mode whose pattern the holes resolve), the modes held (mode
number, note, share of the time), its ceiling and the flame contrast at it,
reported beside the score.  --map writes the time x mode map of one track as
JSON.  A transposition within +-3.5 semitones that would lay the track better
on the modes is suggested with the score it would reach.  --temperature gives
today's gas temperature (the modes, the map and the suggestion follow it),
--static/--reserve today's pressure and reserve (the ceilings).  Folders are
searched recursively; results are cached; a file that cannot be read is
reported in its row and the scan goes on.

Exit status 0 if any file was scanned, 2 if none could be.
"""

from __future__ import annotations

import argparse
import io
import json
import os
import shutil
import sys
import textwrap
from pathlib import Path

from showkit.cli.common import (add_conditions_options, add_json_option, add_rig_option,
                                add_temperature_option, level_caution, load_rig_from_args, print_json, table)
from showkit.errors import InputError, ShowkitError
from showkit.limits import TRANSPOSE_RANGE_CENTS
from showkit.printable import printable
from showkit.units import format_semitones, format_time

#: The largest shift --transpose takes, semitones: the one the scan searches (and may suggest).
_MAX_SEMITONES = TRANSPOSE_RANGE_CENTS / 100.0


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("paths", nargs="+", metavar="PATH",
                        help="audio files or folders (searched recursively)")
    add_rig_option(parser)
    add_conditions_options(parser)
    add_temperature_option(parser)
    add_json_option(parser)
    parser.add_argument("--csv", metavar="FILE", help="also write one row per passage to a CSV file")
    parser.add_argument("-j", "--jobs", metavar="N", type=int,
                        help="worker processes (default: all cores)")
    parser.add_argument("--transpose", metavar="N", type=float,
                        help="write a preview WAV of each track's best passage shifted by N "
                             f"semitones (-{_MAX_SEMITONES:g} to {_MAX_SEMITONES:g}, the range the scan searches) "
                             "into the current folder")
    parser.add_argument("--no-cache", action="store_true", help="analyse again, do not read or write the cache")
    parser.add_argument("--plot", metavar="FILE.png",
                        help="also draw each track's time x mode map with its passages and scores "
                             "(PNG, 1000 px wide, 300 px tall per track, at least 600)")
    parser.add_argument("--map", metavar="FILE.json",
                        help="write the time x mode map of the (one) track as JSON: per frame and mode "
                             "the strength (0-1) and whether the mode is hit, and every note found")


class _Bar:
    """A plain text progress bar on stderr, only when it is a terminal.

    Redirected to a file or a pipe, a bar redrawn with carriage returns is one long
    unreadable line, so nothing is written there.
    """

    def __init__(self, stream=None, width: int = 30):
        self.stream = stream or sys.stderr
        self.width = width
        self.shown = False
        isatty = getattr(self.stream, "isatty", None)
        self.active = bool(isatty and isatty())

    def __call__(self, done: int, total: int, path: str) -> None:
        if total <= 1 or not self.active:
            return
        fill = int(round(self.width * done / total))
        path = printable(path)
        name = path if len(path) <= 40 else "..." + path[-37:]
        self.stream.write(f"\rscanning [{'#' * fill}{'.' * (self.width - fill)}] {done}/{total} {name:<40}")
        self.stream.flush()
        self.shown = True

    def close(self) -> None:
        if self.shown:
            self.stream.write("\n")
            self.stream.flush()


def _shift_text(semitones) -> str:
    if semitones is None:
        return "-"
    if semitones == 0:
        return "none"
    return format_semitones(semitones)


def _fmt(x: float) -> str:
    return format_time(x)


def _modes_text(p: dict) -> str:
    from showkit.analysis.score import listed_shares, unlisted_modes_text

    shares = listed_shares(p.get("mode_shares") or [])
    text = ", ".join(f"n{s['n']} {s['note']} {100 * s['share']:.0f}%" for s in shares[:4])
    return text or unlisted_modes_text(p.get("score", 0)) or "none"


def _print_table(tracks: list[dict]) -> None:
    rows = []
    for rank, t in enumerate(tracks, 1):
        if t["error"]:  # the message goes under the table: in the column it stretched the table (~200 wide)
            rows.append([str(rank), t["path"], "-", "-", "error"])
            continue
        shift = _shift_text(t["transpose_semitones"])
        if t["transpose_semitones"]:
            shift += f" -> {t['transpose_score']:.0f}"
        rows.append([str(rank), t["path"], f"{t['score']:.0f}", _fmt(t["duration_s"]), shift])
    print(table(rows, ["#", "track", "score", "length", "transpose"], "><>><"))
    errors = [(rank, t) for rank, t in enumerate(tracks, 1) if t["error"]]
    if errors:
        print()
    for rank, t in errors:
        path, message = printable(t["path"]), printable(t["error"])
        if message.startswith(path + ": "):  # the message names the file already
            message = message[len(path) + 2:]
        print(f"#{rank} {path}: ERROR: {message}")
    for t in tracks:
        if t["error"] or not t["passages"]:
            continue
        print()
        print(f"{printable(t['path'])}  (score {t['score']:.0f}{', cached' if t.get('cached') else ''})")
        prow = [[f"{_fmt(p['start_s'])}-{_fmt(p['end_s'])}", f"{p['score']:.0f}", _modes_text(p),
                 f"{p['ceiling_db']:+.1f}", f"{100 * p['contrast']:.1f}"] for p in t["passages"]]
        print(table(prow, ["passage", "score", "modes held (time share)", "~ceiling dB", "contrast %"],
                    "<><>>"))


#: The scan's passage ceiling in the JSON and CSV it writes: the best estimate's, to rank passages, not a
#: level to play (a script reading a plain ``ceiling_db`` would take it for one; `ceiling`/`lock` give that).
ESTIMATE_KEY = "estimated_ceiling_db"


def _for_output(tracks: list[dict]) -> list[dict]:
    """The tracks as --json prints them: each passage's ``ceiling_db`` named :data:`ESTIMATE_KEY`."""
    return [{**t, "passages": [{(ESTIMATE_KEY if k == "ceiling_db" else k): v for k, v in p.items()}
                               for p in t["passages"]]} for t in tracks]


def _cell(text: str) -> str:
    """A text cell a spreadsheet shows as written: one starting with = + - @ (or a tab or carriage
    return) would be read as a formula, so it gets a leading apostrophe (OWASP, "CSV Injection")."""
    return "'" + text if text[:1] in ("=", "+", "-", "@", "\t", "\r") else text


def _write_csv(path: str, tracks: list[dict], protect=()) -> None:
    import csv

    from showkit.safesave import write_text

    with io.StringIO(newline="") as f:
        w = csv.writer(f)
        w.writerow(["path", "track_score", "transpose_semitones", "transpose_score", "error",
                    "start_s", "end_s", "passage_score", "modes", ESTIMATE_KEY, "contrast"])
        for t in tracks:
            base = [_cell(t["path"]), t["score"], t["transpose_semitones"], t["transpose_score"],
                    _cell(t["error"] or "")]
            if not t["passages"]:
                w.writerow(base + [""] * 6)
            for p in t["passages"]:
                w.writerow(base + [p["start_s"], p["end_s"], p["score"],
                                   " ".join(str(n) for n in p["modes"]), p["ceiling_db"], p["contrast"]])
        text = f.getvalue()
    # the safe writer: a full disk or a bad path leaves any earlier CSV whole
    write_text(path, text, backups=1, protect=protect, what="CSV file")


def _previews(tracks: list[dict], semitones: float, protect=()) -> None:
    from showkit.analysis.scan import best_passage
    from showkit.analysis.transpose import render_preview

    written: set = set()
    for t in tracks:
        p = best_passage(t) if not t["error"] else None
        if p is None:
            continue
        name = f"{Path(t['path']).stem}_shift{semitones:+.2f}st_{p['start_s']:.0f}-{p['end_s']:.0f}s"
        out, k = Path.cwd() / f"{name}.wav", 1
        while out in written:  # two tracks of one name (in two folders): the second is not written over the first
            k += 1
            out = Path.cwd() / f"{name}_{k}.wav"
        written.add(out)
        try:
            render_preview(t["path"], p["start_s"], p["end_s"], semitones, out, protect=protect)
            print(f"preview: {printable(out)}", file=sys.stderr)
        except ShowkitError as exc:
            print(f"showkit: preview of {t['path']} skipped: {exc.line()}", file=sys.stderr)


def _write_map(rig, track: dict, target: str, protect=()) -> None:
    """Write the track's time x mode map (:func:`showkit.analysis.scan.map_data`) through the safe writer."""
    from showkit.analysis.scan import track_map
    from showkit.safesave import write_text

    data = track_map(rig, track["path"])
    data = {"track": track["path"], **data}
    write_text(Path(target), json.dumps(data, separators=(",", ":")) + "\n", backups=1, protect=protect,
               what="scan map")
    print(f"map: {printable(target)}", file=sys.stderr)


def run(args) -> int:
    from showkit.analysis.scan import expand_paths, scan_paths

    found = len(expand_paths(args.paths)) if args.map is not None else 1  # the folders walked once here
    if found != 1:
        raise InputError("--map writes the map of one track, and " +
                         (f"these name {found} audio files" if found else "no audio file was found there"),
                         " ".join(args.paths), "give one audio file with --map")

    if args.jobs is not None and args.jobs < 1:
        raise InputError(f"the number of workers must be 1 or more (got {args.jobs})", "--jobs", "give a number of workers, e.g. --jobs 2")
    if args.transpose is not None and not -_MAX_SEMITONES <= args.transpose <= _MAX_SEMITONES:
        raise InputError(f"a shift must be within -{_MAX_SEMITONES:g} and {_MAX_SEMITONES:g} semitones, "
                         f"the range the scan searches (got {args.transpose:.10g})",
                         "--transpose", "give a shift such as --transpose -2 or --transpose 0.5")
    rig = load_rig_from_args(args)
    # before the work: a CSV or map over a track (also one found in a folder given), a folder or a
    # pipe is refused at once, not after the whole scan
    outputs = [(getattr(args, option), what, ending) for option, what, ending in (
        ("csv", "CSV file", ".csv"), ("map", "scan map", ".json"), ("plot", "scan plot", ".png"))
        if getattr(args, option) is not None]
    if outputs:  # the folders are walked for this only when there is an output to check
        from showkit.safesave import check_target

        scanned = [(p, "a file being scanned") for p in [*args.paths, *expand_paths(args.paths)]]
        named: dict = {}
        for target, what, ending in outputs:
            check_target(Path(target), scanned, what, ending=ending, reads="the scan reads this file")
            same = named.setdefault(os.path.realpath(target), what)
            if same != what:  # the second would replace the first
                raise InputError(f"the {what} and the {same} name the same file", target,
                                 "give each output a file of its own")
    bar = _Bar()
    try:
        tracks = scan_paths(rig, args.paths, jobs=args.jobs, use_cache=not args.no_cache, progress=bar)
    finally:
        bar.close()
    if not tracks:
        raise InputError("no audio files found", " ".join(args.paths),
                         "give audio files, or folders holding .wav, .flac, .ogg, .mp3 files")
    if (len(tracks) == 1 and tracks[0]["error"] and not args.json and len(args.paths) == 1
            and not Path(args.paths[0]).is_dir()):
        # one file asked for (a file, a pipe, a device, a dangling or looping link, a missing
        # name) and it could not be read: its one line, as any command gives it
        raise InputError(tracks[0]["error"])
    # the files first: a reader that stops early (`| head`) closes the pipe on the table, which
    # must not cost the map, CSV or previews asked for; a file that cannot be written is said
    # after the table, which is still printed
    protect = [(t["path"], "a scanned track") for t in tracks] + [(p, "a scanned path") for p in args.paths]
    unwritten = None
    try:
        if args.csv:
            _write_csv(args.csv, tracks, protect)
        if args.transpose is not None:
            _previews(tracks, args.transpose, protect)
        if getattr(args, "plot", None) and any(t["error"] is None for t in tracks):
            from showkit.export.figures import plot_scan

            print(f"wrote {plot_scan(rig, tracks, args.plot)}", file=sys.stderr)
        if args.map is not None and tracks[0]["error"] is None:
            _write_map(rig, tracks[0], args.map, protect)
    except ShowkitError as exc:
        unwritten = exc
    level_caution()
    if args.json:
        print_json({"rig": rig.name, "static_pressure_pa": rig.static_pa, "reserve": rig.reserve,
                    "temperature_k": rig.temperature_k, "tracks": _for_output(tracks)})
    else:
        _print_table(tracks)
        width = max(60, min(100, shutil.get_terminal_size((100, 24)).columns))
        notes = [f"On {rig.name}, static {rig.static_pa:.2f} Pa, reserve {rig.reserve:g}, gas "
                 f"{rig.temperature_k - 273.15:.1f} C (the modes and the map are for it).",
                 "score: the share of the passage's time a note is held on a readable mode, 0-100.",
                 "~ceiling: the best estimate's ceiling in dB applied to the file as recorded, to rank "
                 "passages -- not a level to play: `showkit ceiling` and `lock` give the ceiling over the "
                 "loss family, often lower.",
                 "contrast: the steady-sine flame heights on the per-frame pressure envelope."]
        print()
        for line in notes:
            print(textwrap.fill(line, width, subsequent_indent="  "))
        print(textwrap.fill(f"Ceilings rest on: {rig.describe_drive()}.", width, subsequent_indent="  "))
    if unwritten is not None:
        raise unwritten
    return 0 if any(t["error"] is None for t in tracks) else 2
