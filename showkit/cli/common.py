"""Options and output shared by the subcommands."""

from __future__ import annotations

import argparse
import json
import math
import sys

from showkit import units
from showkit.printable import printable
from showkit.safety import LEVEL_CAUTION


def add_rig_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--rig", metavar="RIG.toml",
                        help="rig file describing your tube (default: the bundled demo rig)")


def add_conditions_options(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--static", metavar="PRESSURE",
                        help='today\'s static overpressure from the manometer, e.g. "18 Pa", '
                             '"0.08 inH2O", "0.2 mbar" (default: the rig file\'s)')
    parser.add_argument("--reserve", metavar="FRACTION",
                        help="fraction of the static pressure kept in reserve at every hole, "
                             "0 to 0.9 (default: the rig file's)")


def add_temperature_option(parser: argparse.ArgumentParser) -> None:
    """``--temperature``: today's gas temperature (the modes move about 3 cents per kelvin)."""
    parser.add_argument("--temperature", metavar="TEMP",
                        help='today\'s gas temperature, e.g. "24 C", "75 F" (default: the rig file\'s); '
                             "the modes move with it, by about 3 cents per kelvin")


def add_json_option(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("--json", action="store_true", help="print the result as JSON on stdout")


def conditions_from_args(args, base):
    """Today's conditions from ``--static``/``--temperature``/``--reserve`` over ``base``.

    Through the one door (:func:`showkit.conditions.make_conditions`): the same
    limits as the rig file, one line naming the option when a value is outside.
    """
    from showkit.conditions import make_conditions

    return make_conditions(getattr(args, "static", None), getattr(args, "temperature", None),
                           getattr(args, "reserve", None), base=base,
                           where={"static": "--static", "temperature": "--temperature", "reserve": "--reserve"})


def load_rig_from_args(args, check_calibration: bool = True):
    """The rig named by ``--rig`` (or the demo) with ``--static``/``--temperature``/``--reserve`` applied.

    ``check_calibration=False`` only for ``measure level``, which replaces a refused calibration.
    """
    from showkit.rigfile import load_rig

    rig = load_rig(getattr(args, "rig", None), check_calibration)
    return rig.with_conditions(conditions=conditions_from_args(args, rig.conditions))


def sheet_rigs(sheet, args):
    """``(file_rig, today_rig)``: the rig ``sheet`` names (read once), and the same with
    ``--static``/``--reserve``/``--temperature`` applied over its own conditions, through the one
    door (:func:`conditions_from_args`): the rig the cues are checked, rendered and drawn on."""
    from showkit.show.lock import sheet_rig

    rig = sheet_rig(sheet)
    return rig, rig.with_conditions(conditions=conditions_from_args(args, rig.conditions))


def sheet_rig_today(sheet, args):
    """The today rig of :func:`sheet_rigs`."""
    return sheet_rigs(sheet, args)[1]


def frequency_option(text, where: str):
    """A frequency option (``120``, ``"120 Hz"``, ``"1.2 kHz"``) in Hz, or None when not given."""
    if text is None:
        return None
    return units.frequency_hz(units.number_or_text(text), where)


def time_option(text, where: str):
    """A time option (``42``, ``"42.5 s"``, ``"0:42"``) in seconds, or None when not given."""
    if text is None:
        return None
    return units.duration_s(units.number_or_text(text), where)


def clean_json(value):
    """Make a result JSON-safe: numpy scalars and arrays to lists, non-finite floats to null."""
    import numpy as np

    if isinstance(value, dict):
        return {str(k): clean_json(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [clean_json(v) for v in value]
    if isinstance(value, np.ndarray):
        return clean_json(value.tolist())
    if isinstance(value, np.generic):
        return clean_json(value.item())
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def print_json(value) -> None:
    json.dump(clean_json(value), sys.stdout, indent=2)
    sys.stdout.write("\n")


def level_caution() -> None:
    """The cautions line, on stderr, wherever a command sets or reports levels."""
    print(f"CAUTION: {LEVEL_CAUTION}", file=sys.stderr)


def table(rows: list[list[str]], header: list[str], align: str | None = None) -> str:
    """A plain text table; ``align`` has one of ``<``/``>`` per column."""
    rows = [[printable(c) for c in r] for r in rows]  # cells may quote a file: ids, labels, paths
    cols = len(header)
    align = align or "<" * cols
    width = [max(len(str(r[i])) for r in [header] + rows) for i in range(cols)]
    lines = ["  ".join(f"{str(h):{a}{w}}" for h, a, w in zip(header, align, width)).rstrip(),
             "  ".join("-" * w for w in width)]
    lines += ["  ".join(f"{str(c):{a}{w}}" for c, a, w in zip(r, align, width)).rstrip() for r in rows]
    return "\n".join(lines)
