"""Check a locked cue sheet against today's manometer reading and gas temperature.

Every valid lock's ceiling is re-derived for today's static pressure (and
reserve) by exact scaling -- no re-analysis -- and compared with the cue's
gain.  With today's gas temperature (--temperature) the modes move: every
valid cue is locked again in memory for today's gas, as `showkit run
--temperature` plays it (tone and glide cues on modes follow the modes), and
checked against that ceiling; nothing is written to the sheet.  Cues that
no longer fit are listed with how many dB they must come down; stale cues
(the audio, rig or calibration changed since the lock) are refused until
re-locked.  Exit status 0 when every cue is ok, 2 otherwise.
"""

from __future__ import annotations

import argparse

from showkit.cli.common import add_conditions_options, add_json_option, add_temperature_option
from showkit.printable import printable
from showkit.units import agree, format_count


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("sheet", help="cue sheet (TOML)")
    add_conditions_options(parser)
    add_temperature_option(parser)
    add_json_option(parser)


def headroom_bar(headroom_db: float | None, width: int = 12, span_db: float = 12.0) -> str:
    """A text bar: one '#' per span/width dB of headroom, '!' when over."""
    if headroom_db is None:
        return "?" * 3
    if headroom_db < 0:
        return "!" * min(width, max(1, int(round(-headroom_db / span_db * width))))
    filled = min(width, int(round(headroom_db / span_db * width)))
    return "#" * filled + "." * (width - filled)


def run(args) -> int:
    from showkit.cli.common import level_caution, print_json, sheet_rigs, table
    from showkit.show.preshow import checks_for_today
    from showkit.show.sheet import load_sheet
    from showkit.show.status import CueStatus, ceiling_text, headroom_text

    sheet = load_sheet(args.sheet)
    file_rig, today = sheet_rigs(sheet, args)
    # the pre-show check's rule (`showkit run`, the Show view): locks judged against the rig file,
    # ceilings for today's static pressure, reserve and gas
    checks = checks_for_today(sheet, file_rig, today)
    level_caution()
    gas_c = today.temperature_k - 273.15
    if args.json:
        print_json({"sheet": str(sheet.path), "static_pressure_pa": today.static_pa,
                    "gas_temperature_c": gas_c, "reserve": today.reserve, "cues": [c.to_json() for c in checks]})
    else:
        rows = [[c.id, f"{c.gain_db:+.2f}", ceiling_text(c.ceiling_db, c.silent),
                 headroom_text(c.headroom_db, c.silent), "" if c.silent else headroom_bar(c.headroom_db),
                 c.status, c.message] for c in checks]
        print(f"{printable(sheet.title)}: {format_count(len(checks), 'cue')} on {printable(today.name)}, static {today.static_pa:.2f} Pa, "
              f"gas {gas_c:.1f} C, reserve {today.reserve:g}")
        print(f"ceilings rest on: {today.describe_drive()}")
        print(f"ceilings hold for: {today.loss_family.describe()}")
        print(table(rows, ["cue", "gain dB", "ceiling dB", "headroom", "", "status", "note"], "<>>><<<"))
        bad = [c for c in checks if c.status is not CueStatus.OK]
        if bad:
            print(f"\n{format_count(len(bad), 'cue')} {agree(len(bad), 'needs', 'need')} attention: "
                  + ", ".join(f"{printable(c.id)} ({c.status})" for c in bad))
    return 0 if all(c.status is CueStatus.OK for c in checks) else 2
