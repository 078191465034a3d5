"""Render a locked cue sheet to playable audio, every cue at or below its ceiling.

Each cue gets its gain and fades, and then the rendered samples are run
through the tube model again: a cue that would take any hole below the safe
line, or past full scale, is refused.  Stale cues are refused until re-locked.
Writes one WAV of the whole show (-o, 48 kHz) or one WAV per cue at the
source rate (--per-cue DIR; tones at 48 kHz), 32-bit float or 24-bit.
"""

from __future__ import annotations

import argparse

from showkit.cli.common import add_conditions_options
from showkit.printable import printable


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("sheet", help="cue sheet (TOML)")
    out = parser.add_mutually_exclusive_group(required=True)
    out.add_argument("-o", "--output", metavar="SHOW.wav", help="one WAV with every cue in order (48 kHz); a file it replaces is kept as SHOW.wav.bak")
    out.add_argument("--per-cue", metavar="DIR", help="one WAV per cue, NN-id.wav, at the source rate; files it replaces are kept as .bak")
    parser.add_argument("--bits", choices=("float", "24"), default="float",
                        help="sample format: 32-bit float (default) or 24-bit integer")
    add_conditions_options(parser)


def run(args) -> int:
    from pathlib import Path

    from showkit.cli.common import level_caution, sheet_rig_today, table
    from showkit.safesave import check_target
    from showkit.show.render import render_iter, write_per_cue, write_show
    from showkit.show.sheet import load_sheet, sheet_inputs
    from showkit.show.status import ceiling_text

    sheet = load_sheet(args.sheet)
    protect = sheet_inputs(sheet)  # never write over the sheet, its rig or a cue's audio
    if args.output:
        check_target(Path(args.output), protect, "rendered show")  # before any work
    today = sheet_rig_today(sheet, args)
    subtype = "FLOAT" if args.bits == "float" else "PCM_24"
    cues = render_iter(sheet, today)
    if args.output:
        summaries = write_show(today, cues, Path(args.output), subtype, protect=protect)
        written = [Path(args.output)]
    else:
        written, summaries = write_per_cue(cues, Path(args.per_cue), subtype, protect=protect)
    level_caution()
    rows = [[printable(c.id), f"{c.gain_db:+.2f}", ceiling_text(c.ceiling_db, c.silent), f"{c.min_pressure_pa:.2f}",
             f"{c.margin_pa:+.2f}", f"{c.duration_s:.1f}"] for c in summaries]
    print(table(rows, ["cue", "gain dB", "ceiling dB", "lowest Pa", "margin Pa", "seconds"], "<>>>>>"))
    print(f"every cue verified against the pressure model at {today.static_pa:.2f} Pa static, "
          f"reserve {today.reserve:g} (safe line {today.reserve * today.static_pa:.2f} Pa); "
          f"rests on: {today.describe_drive()}")
    for p in written:
        print(f"wrote {printable(p)}")
    return 0
