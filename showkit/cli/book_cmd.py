"""Write a printable show book (PDF) of a cue sheet.

The book has a cover (title, rig, today's conditions, the calibration and
drive model every ceiling rests on, what a ceiling guarantees and assumes,
the safety cautions), the running order (every cue with its gain, ceiling,
headroom and state; stale or over cues marked), one page per cue (the
predicted flame row at its most demanding moment; for music the time x mode
map of the passage) and the tube (the modes and each readable mode's shape).
States and ceilings are those of `showkit check`; the text can be selected.
"""

from __future__ import annotations

import argparse
import sys

from showkit.cli.common import add_conditions_options, level_caution, sheet_rig_today
from showkit.show.status import CueStatus


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("sheet", metavar="SHEET.toml", help="the cue sheet")
    parser.add_argument("-o", "--out", required=True, metavar="BOOK.pdf", help="the PDF file to write")
    parser.add_argument("--paper", choices=["a4", "letter"], default="a4",
                        help="paper size: a4 (210 x 297 mm, default) or letter (8.5 x 11 in)")
    parser.add_argument("--png", metavar="DIR", help="also write every page as a PNG into this folder")
    add_conditions_options(parser)


def run(args) -> int:
    from showkit.export.book import make_book
    from showkit.show.sheet import load_sheet

    # the sheet and its rig read once; --static/--reserve through the one door, over that rig
    # (as check and run read them), and the book made on it
    sheet = load_sheet(args.sheet)
    today = sheet_rig_today(sheet, args)
    static_pa = today.static_pa if args.static is not None else None
    reserve = today.reserve if args.reserve is not None else None
    result = make_book(sheet, args.out, args.paper, args.png, static_pa, reserve, rig=today)
    level_caution()
    bad = {k: v for k, v in result["states"].items() if v != CueStatus.OK}
    print(f"wrote {result['pdf']}: {result['pages']} pages ({args.paper})")
    if result["png"]:
        print(f"wrote {len(result['png'])} PNG pages into {args.png}")
    if bad:
        print("marked in the book as not playable: " + ", ".join(f"{k} ({v})" for k, v in bad.items()),
              file=sys.stderr)
    return 0
