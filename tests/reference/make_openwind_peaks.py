"""Remake tests/reference/openwind_peaks.json: input-impedance peaks from openwind.

openwind (PyPI, Inria) computes the input impedance of a bore with side holes
by the transfer-matrix method.  Its peaks are the reference for the hole-loaded
tube model in tests/test_tube.py.  It takes about 15-30 s per geometry, so the
numbers are cached here and the test only reads the json.

Run (needs the ``reference`` extra, ``pip install -e ".[reference]"``):

    python tests/reference/make_openwind_peaks.py

Method: |Z_in| on a 0.5 Hz grid from 10 to 950 Hz, then each local maximum
re-evaluated on 21 points within one grid step either side, and the top refined
by a parabola through the three highest points of log|Z| (peak error far below
0.01 Hz).  Rigid cap (``bell: closed``), unflanged holes, 20 C air in openwind's
own air model.
"""

from __future__ import annotations

import json
import platform
from pathlib import Path

import numpy as np

OUT = Path(__file__).with_name("openwind_peaks.json")
F_LO_HZ, F_HI_HZ, STEP_HZ = 10.0, 950.0, 0.5
TEMPERATURE_C = 20.0


def geometries() -> list[dict]:
    """The air-filled test tubes (SI): positions from the driven end."""
    return [
        {   # DEVELOPERS.md Methods §4 example
            "name": "physics-md-2m",
            "length_m": 2.0, "bore_m": 0.075, "wall_m": 0.002, "hole_diameter_m": 0.0015,
            "hole_positions_m": np.linspace(0.0, 2.0, 79 + 2)[1:-1].tolist(),
        },
        {   # shorter, narrower, bigger holes, row not centred
            "name": "short-1p2m-big-holes",
            "length_m": 1.2, "bore_m": 0.050, "wall_m": 0.003, "hole_diameter_m": 0.0025,
            "hole_positions_m": (0.1 + 0.035 * np.arange(28)).tolist(),
        },
        {   # wide bore, thin wall, uneven spacing (denser towards the cap)
            "name": "wide-1p5m-uneven",
            "length_m": 1.5, "bore_m": 0.100, "wall_m": 0.0015, "hole_diameter_m": 0.002,
            "hole_positions_m": (0.2 + 1.1 * np.sqrt(np.linspace(0.0, 1.0, 40))).tolist(),
        },
    ]


def openwind_peaks(geom: dict) -> tuple[list[float], float]:
    """Refined |Z_in| peak frequencies (Hz) and openwind's sound speed (m/s)."""
    import openwind

    bore = [[0.0, geom["length_m"], geom["bore_m"] / 2, geom["bore_m"] / 2, "linear"]]
    holes = [["label", "position", "length", "radius"]]
    holes += [[f"h{i}", float(x), geom["wall_m"], geom["hole_diameter_m"] / 2]
              for i, x in enumerate(geom["hole_positions_m"])]
    freqs = np.arange(F_LO_HZ, F_HI_HZ + STEP_HZ / 2, STEP_HZ)
    comp = openwind.ImpedanceComputation(
        freqs, bore, holes, radiation_category={"bell": "closed", "holes": "unflanged"},
        compute_method="TMM", temperature=TEMPERATURE_C)
    mag = np.abs(comp.impedance)
    idx = np.where((mag[1:-1] > mag[:-2]) & (mag[1:-1] >= mag[2:]))[0] + 1
    fine = (freqs[idx][:, None] + np.linspace(-STEP_HZ, STEP_HZ, 21)[None, :])
    fine_mag = np.abs(np.asarray(comp.recompute_impedance_at(fine.ravel()))).reshape(fine.shape)
    peaks = []
    for row_f, row_m in zip(fine, np.log(fine_mag)):
        j = int(np.clip(np.argmax(row_m), 1, row_f.size - 2))
        y0, y1, y2 = row_m[j - 1:j + 2]
        h = row_f[1] - row_f[0]
        shift = 0.5 * (y0 - y2) / (y0 - 2 * y1 + y2)
        peaks.append(float(row_f[j] + shift * h))
    (c,) = comp.get_entry_coefs("c")
    return peaks, float(c)


def main() -> None:
    import openwind

    out = {"openwind_version": openwind.__version__, "python": platform.python_version(),
           "method": "TMM", "radiation": {"bell": "closed", "holes": "unflanged"},
           "temperature_c": TEMPERATURE_C, "grid_hz": [F_LO_HZ, F_HI_HZ, STEP_HZ],
           "geometries": []}
    for geom in geometries():
        peaks, c = openwind_peaks(geom)
        out["geometries"].append({**geom, "openwind_sound_speed_m_s": c, "peaks_hz": peaks})
        print(geom["name"], [round(p, 2) for p in peaks])
    OUT.write_text(json.dumps(out, indent=1) + "\n")
    print("wrote", OUT)


if __name__ == "__main__":
    main()
