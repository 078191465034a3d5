"""Compute and lock the ceiling of every cue in a cue sheet.

For each cue showkit simulates that exact sound (passage, tone or glide, with
its fades) in the sheet's rig and writes a [cue.lock] table: the ceiling in dB
and what it was computed from (hashes of the source samples, of the rig's
acoustic fields and of the calibration; static pressure, reserve and analysis
version).  A gain above its new ceiling is clamped in the file, with a message
naming the cue.  The sheet is saved safely; the previous version is kept as
SHEET.toml.bak.
"""

from __future__ import annotations

import argparse
import sys

from showkit.printable import printable


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("sheet", help="cue sheet (TOML)")
    parser.add_argument("--cue", action="append", metavar="ID",
                        help="lock only this cue (repeat for more; default: every cue)")


def run(args) -> int:
    from showkit.cli.common import level_caution, table
    from showkit.show.lock import check_sheet, lock_sheet, sheet_rig
    from showkit.show.sheet import load_sheet, save_sheet
    from showkit.show.sources import SignalMemo
    from showkit.show.status import ceiling_text

    sheet = load_sheet(args.sheet)
    rig = sheet_rig(sheet)
    if args.cue:
        for cid in args.cue:
            sheet.cue(cid)

    def progress(k, n, cid):
        if cid is not None and sys.stderr.isatty():
            print(f"\rlocking {k + 1}/{n}: {printable(cid):<24}", end="", file=sys.stderr, flush=True)

    signals = SignalMemo()  # each cue's sound built once, for its lock and the check below
    messages = lock_sheet(sheet, rig, args.cue, progress, signals=signals)
    if sys.stderr.isatty():
        print("\r" + " " * 50 + "\r", end="", file=sys.stderr)
    save_sheet(sheet)
    level_caution()
    for m in messages:
        print(f"clamped: {printable(m)}")
    rows = []
    for c, state in zip(sheet.cues, check_sheet(sheet, rig, signals=signals)):
        lock = c.lock
        rows.append([c.id, c.kind, f"{c.gain_db:+.2f}",
                     ceiling_text(None if lock is None else lock.ceiling_db, state.silent),
                     "-" if lock is None or state.silent else lock.limited_by.replace("_", " "), state.status])
    print(table(rows, ["cue", "kind", "gain dB", "ceiling dB", "limited by", "status"], "<<>><<"))
    print(f"locked for {printable(rig.name)} at {rig.static_pa:.2f} Pa static, reserve {rig.reserve:g}; "
          f"saved {printable(sheet.path)}")
    print(f"ceilings rest on: {rig.describe_drive()}")
    print(f"ceilings hold for: {rig.loss_family.describe()}")
    return 0
