"""The safe drive ceiling of a track or a passage of it.

The ceiling is the largest gain (dB, applied to the file as recorded) at which
the pressure at every hole stays at or above reserve x static pressure above
ambient for the whole passage, including the tube's ring-down after it.  It is
capped so the output never exceeds 0 dBFS (then it is "limited by full scale").
The tube model is linear, so a different manometer reading moves the ceiling
by exactly 20 log10(new / old) dB.
"""

from __future__ import annotations

import argparse
import math

from showkit.cli.common import (add_conditions_options, add_json_option, add_rig_option, level_caution,
                                load_rig_from_args, print_json, time_option)
from showkit.printable import printable
from showkit.units import format_time


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("track", help="audio file (WAV, FLAC, OGG, MP3, ...); channels are averaged")
    parser.add_argument("--start", metavar="TIME", help='start of the passage: seconds or "m:ss.s" (default: 0)')
    parser.add_argument("--end", metavar="TIME", help='end of the passage: seconds or "m:ss.s" (default: the end)')
    add_rig_option(parser)
    add_conditions_options(parser)
    add_json_option(parser)


def run(args) -> int:
    from showkit.analysis.pressure import passage_report
    from showkit.physics.ceiling import MAX_GAIN_DB

    rig = load_rig_from_args(args)
    start, end = time_option(args.start, "--start"), time_option(args.end, "--end")
    report = passage_report(rig, args.track, start, end)
    level_caution()
    if args.json:
        print_json(report.to_json())
        return 0
    r = report
    where = f"{format_time(r.start_s)} to {format_time(r.end_s)}"
    limit = ("the pressure at the holes" if r.ceiling.limited_by == "pressure"
             else "digital full scale (0 dBFS)")
    if r.ceiling_db >= MAX_GAIN_DB:
        limit = f"the {MAX_GAIN_DB:+.0f} dB cap on any gain"
    print(f"{printable(args.track)}, {where}, on {printable(rig.name)}")
    print(f"  ceiling            {r.ceiling_db:+.1f} dB  (set by {limit})")
    if math.isfinite(r.output_peak_dbfs):
        print(f"  output peak        {r.output_peak_dbfs:.1f} dBFS at the ceiling")
    else:
        print("  output peak        none: the passage is silent")
    print(f"  closest approach   hole {r.worst_hole + 1} of {rig.geometry.hole_count} at "
          f"{format_time(r.worst_time_s)}: {r.min_pressure_pa:.1f} Pa above ambient "
          f"(safe line {rig.reserve * rig.static_pa:.1f} Pa)")
    print(f"  flame contrast     {100 * r.contrast:.1f} % (median over the passage at the ceiling)")
    print(f"  static pressure    {rig.static_pa:.2f} Pa, reserve {rig.reserve:g}; gas at "
          f"{rig.temperature_k - 273.15:.1f} C")
    print(f"  rests on           {r.drive_text}")
    if r.family_text:
        print(f"  safe for           {r.family_text}; lowest: {r.set_by}")
        print("  flames             best estimate (" + rig.loss_family.describe_best() + ")")
    return 0
