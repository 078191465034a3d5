"""List the tube's resonances: frequency, nearest note, Q and the flame pattern.

Modes are found with the transfer-matrix model of the rig (lossy tube, holes
as shunt impedances, rigid cap, driven membrane) up to the plane-wave limit.
n = 0 is the breathing mode the holes create (all flames pulse together, no
pattern); n >= 1 has n pressure nodes, where the flames stand tallest at safe
levels.  A pattern needs about 4 holes per half-wavelength to be read.
"""

from __future__ import annotations

import argparse
import math
import sys

from showkit.cli.common import (add_json_option, add_rig_option, add_temperature_option, frequency_option,
                                 load_rig_from_args, print_json, table)
from showkit.errors import InputError
from showkit.printable import printable


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_rig_option(parser)
    add_temperature_option(parser)
    parser.add_argument("--max-frequency", metavar="FREQ",
                        help='list modes up to this frequency, e.g. 800 or "1.2 kHz" (default: the plane-wave limit)')
    add_json_option(parser)
    parser.add_argument("--plot", metavar="FILE.png",
                        help="also draw the mode frequencies, Q and shapes into a picture (1000x600 px PNG)")


def modes_report(rig, f_max_hz=None) -> dict:
    """The ``showkit modes --json`` object for a rig."""
    from showkit.physics.modes import find_modes

    model = rig.model
    modes = find_modes(model, f_max_hz)
    return {
        "rig": rig.name,
        "gas": {"fuel": rig.fuel, "air_fraction": rig.air_fraction,
                "temperature_k": rig.temperature_k,
                "sound_speed_m_s": rig.gas.sound_speed_m_s,
                "density_kg_m3": rig.gas.density_kg_m3, "gamma": rig.gas.gamma},
        "plane_wave_limit_hz": model.plane_wave_limit_hz,
        "holes": rig.geometry.hole_count,
        "hole_model": rig.loss_family.describe_best(),
        "modes": [{"n": m.n, "frequency_hz": m.frequency_hz, "q": m.q, "note": m.note,
                   "cents": m.cents, "flame_peaks": m.flame_peaks,
                   "peak_spacing_m": m.peak_spacing_m, "pattern": m.pattern,
                   "shape": m.shape} for m in modes],
    }


def run(args) -> int:
    f_max = frequency_option(args.max_frequency, "--max-frequency")
    if f_max is not None and not (math.isfinite(f_max) and f_max > 0):
        raise InputError(f"--max-frequency must be a frequency above 0 Hz (got {f_max})", "--max-frequency",
                         "give e.g. --max-frequency 800, or leave it out for the plane-wave limit")
    rig = load_rig_from_args(args)
    report = modes_report(rig, f_max)
    if getattr(args, "plot", None):
        from showkit.export.figures import plot_modes

        print(f"wrote {plot_modes(rig, args.plot, f_max)}", file=sys.stderr)
    if args.json:
        print_json(report)
        return 0
    gas = rig.gas
    print(f"{printable(rig.name)}: {rig.geometry.length_m:.3f} m long, {rig.geometry.bore_m * 1e3:.1f} mm bore, "
          f"{rig.geometry.hole_count} holes")
    print(f"gas: {rig.fuel} with {rig.air_fraction * 100:g} % air at "
          f"{rig.temperature_k - 273.15:.1f} C; sound speed {gas.sound_speed_m_s:.2f} m/s, "
          f"density {gas.density_kg_m3:.3f} kg/m3")
    print(f"holes: {report['hole_model']} (the best estimate)")
    print(f"plane-wave limit {report['plane_wave_limit_hz']:.0f} Hz (no modes listed above it)\n")
    rows = []
    for m in report["modes"]:
        rows.append([str(m["n"]), f"{m['frequency_hz']:.1f}", m["note"], f"{m['cents']:+.0f}",
                     "-" if m["q"] is None else f"{m['q']:.0f}", str(m["flame_peaks"]),
                     # one peak has nothing to stand apart from
                     "-" if m["peak_spacing_m"] is None or m["flame_peaks"] < 2
                     else f"{m['peak_spacing_m'] * 1e3:.0f}",
                     m["pattern"]])
    print(table(rows, ["n", "freq Hz", "note", "cents", "Q", "flame peaks", "spacing mm", "pattern"],
                ">>>>>>><"))
    if not rows:
        limit = report["plane_wave_limit_hz"]
        print("(no resonances below the plane-wave limit)" if f_max is None or f_max >= limit
              else f"(no resonances below {f_max:.6g} Hz)")
    return 0
