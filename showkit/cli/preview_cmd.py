"""Write a video of the flame row the model predicts, with the show's sound in sync.

For a cue sheet: every cue rendered and verified as `showkit render` does, its
flame row at the level it plays at; a cue that may not be played (stale, over)
is a short silent card saying so.  For a track: the track (or --start/--end
passage) at --gain, by default its ceiling, never above it.  30 frames per
second, every hole drawn, holes drawing in air marked in blue, the cue and time
on every frame.  True scale by default: at safe levels the pattern is a few per
cent.  --magnify N draws the differences from the still flame N times larger
and says so on every frame.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from showkit import units
from showkit.cli.common import (add_conditions_options, add_rig_option, level_caution, load_rig_from_args,
                                sheet_rig_today, time_option)
from showkit.errors import InputError


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("source", metavar="SHEET.toml|TRACK", help="a cue sheet, or an audio file")
    parser.add_argument("-o", "--out", required=True, metavar="PREVIEW.mp4", help="the video file to write")
    parser.add_argument("--magnify", type=float, default=1.0, metavar="N",
                        help="draw differences from the still flame N times larger (default 1: true scale)")
    parser.add_argument("--size", default="1280x720", metavar="WxH", help="picture size in pixels (default 1280x720)")
    parser.add_argument("--gain", metavar="DB", help="a track's gain in dB (default: its ceiling; never above it)")
    parser.add_argument("--start", metavar="TIME", help="a track's passage start: seconds or m:ss.s")
    parser.add_argument("--end", metavar="TIME", help="a track's passage end: seconds or m:ss.s")
    add_rig_option(parser)
    add_conditions_options(parser)


def _size(text: str):
    try:
        w, h = (int(v) for v in str(text).lower().split("x"))
    except ValueError:
        raise InputError(f"cannot read the size {text!r}", "--size", "give WIDTHxHEIGHT, e.g. 1280x720") from None
    return w, h


def run(args) -> int:
    from showkit.export.preview import (
        check_options,
        check_output,
        sheet_timeline,
        track_timeline,
        write_video,
    )

    size = _size(args.size)
    check_options(size, args.magnify)
    check_output(args.out)  # before the slow work
    src = Path(args.source)
    if src.suffix.lower() == ".toml":
        from showkit.show.sheet import load_sheet

        for opt in ("gain", "start", "end"):
            if getattr(args, opt) is not None:
                raise InputError(f"--{opt} is for a track preview", f"--{opt}",
                                 "a sheet plays every cue at its own locked gain; leave it out")
        if args.rig is not None:
            raise InputError("--rig is for a track preview", "--rig",
                             "a sheet plays on the rig it names (its rig = ...); leave it out")
        # the sheet and its rig read once; --static/--reserve checked over that rig, the one drawn
        sheet = load_sheet(src)
        rig = sheet_rig_today(sheet, args)
        static = rig.static_pa if args.static is not None else None
        reserve = rig.reserve if args.reserve is not None else None  # checked, as a number
        tl = sheet_timeline(sheet, static, reserve, rig=rig)
    else:
        rig = load_rig_from_args(args)  # checks --static/--reserve
        gain = None if args.gain is None else units.gain_db(args.gain, "--gain", "give dB, e.g. --gain -12")
        tl = track_timeline(rig, src, time_option(args.start, "--start"), time_option(args.end, "--end"), gain)
    level_caution()
    result = write_video(tl, args.out, size, args.magnify)
    for note in tl.notes:
        print(f"not played: {note}", file=sys.stderr)
    scale = "true scale" if args.magnify == 1 else f"magnified x{args.magnify:g}"
    print(f"wrote {result['path']}: {units.format_count(result['frames'], 'frame')} at {result['fps']} fps "
          f"({result['duration_s']:.2f} s, {size[0]}x{size[1]}, {scale}) with the sound")
    return 0
