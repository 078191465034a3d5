"""Write measured and fitted values back into a rig file, safely.

The file is edited with tomlkit so the presenter's comments and layout stay;
the new text is checked by :func:`showkit.rigfile.parse_rig` before it
replaces the file; the write goes to a temporary file in the same folder,
is fsynced and renamed over the original, and the previous version is kept
as ``NAME.bak`` (older backups move to ``NAME.bak.1`` ... ``NAME.bak.9``).

The fitted sound speed is written as something a presenter can read and
check: by default the **air fraction** in the fuel (gas purity: a tube not
fully purged holds air, which moves every mode), solved from the real-gas
model at the rig's temperature; when no air fraction within 0 to 0.5 gives
that sound speed, as an **effective gas temperature** instead
(``c`` grows about 0.17 % per kelvin, DEVELOPERS.md Methods §2).
"""

from __future__ import annotations

import datetime as _dt
from pathlib import Path

from showkit.errors import RigError
from showkit.physics.gas import gas_state
from showkit.rigfile import CALIBRATION_SAME_GAS_K, demo_rig_path, parse_rig
from showkit.safesave import write_text

BACKUPS_KEPT = 9


def gas_for_sound_speed(fuel: str, air_fraction: float, temperature_k: float, ambient_pa: float,
                        sound_speed_m_s: float, prefer: str = "air_fraction") -> tuple[str, float]:
    """The rig value that gives a sound speed: ``("air_fraction", x)`` or ``("temperature", T_K)``.

    Parameters
    ----------
    fuel : str
    air_fraction : float
        The rig's air fraction (kept when the temperature is solved).
    temperature_k : float
        The rig's gas temperature, K (kept when the air fraction is solved).
    ambient_pa : float
        Ambient pressure, Pa.
    sound_speed_m_s : float
        Target sound speed, m/s.
    prefer : str
        ``"air_fraction"`` or ``"temperature"``.
    """
    from scipy.optimize import brentq

    def speed_air(a):
        return gas_state(fuel, a, temperature_k, ambient_pa).sound_speed_m_s - sound_speed_m_s

    def speed_t(t):
        return gas_state(fuel, air_fraction, t, ambient_pa).sound_speed_m_s - sound_speed_m_s

    if prefer == "air_fraction" and fuel != "air" and speed_air(0.0) * speed_air(0.5) <= 0:
        return "air_fraction", float(brentq(speed_air, 0.0, 0.5, xtol=1e-7))
    if speed_t(233.15) * speed_t(373.15) <= 0:
        return "temperature", float(brentq(speed_t, 233.15, 373.15, xtol=1e-4))
    raise RigError(f"no gas temperature within -40 to 100 C gives the measured sound speed "
                   f"{sound_speed_m_s:.1f} m/s for {fuel}", "fit",
                   "check the fuel named in the rig file and the tube length")


def save_text(path: Path, text: str) -> Path:
    """Check ``text`` as a rig, back up ``path``, write atomically; returns the backup path.

    The calibration point is not checked here: a fit that moves the modes can move them onto
    the reference frequency, and the fit must still be kept; the rig then refuses to load
    (one line naming a frequency that would do) until ``showkit measure level`` calibrates again.
    """
    parse_rig(text, str(path), path, check_calibration=False)
    write_text(path, text, backups=BACKUPS_KEPT + 1, what="rig file")  # NAME.bak and NAME.bak.1 .. .bak.9
    return path.with_name(path.name + ".bak")


def _writable(path: Path) -> Path:
    path = Path(path)
    if path.resolve() == demo_rig_path().resolve():
        raise RigError("will not change the bundled demo rig", str(path),
                       "copy it to your own rig file and give --rig that file")
    if not path.is_file():
        raise RigError("no such rig file", str(path), "give the rig file to update with --rig")
    return path


def update_rig(path, *, sound_speed_m_s: float | None = None, end_correction: float | None = None,
               resistance_pa_s_m3: float | None = None, flow: float | None = None,
               modes: list | None = None,
               measured_extra: dict | None = None, response_freq_hz=None, response_db=None,
               reference: dict | None = None, prefer_gas: str = "air_fraction",
               today: str | None = None, temperature_k: float | None = None) -> Path:
    """Write measured and fitted values into a rig file; returns the backup's path.

    Parameters
    ----------
    path : path-like
        The rig file (not the bundled demo).
    sound_speed_m_s : float, optional
        Fitted sound speed, m/s: written as ``gas.air_fraction`` or ``gas.temperature``.
    end_correction : float, optional
        Hole end correction, hole radii (``holes.end_correction``).
    resistance_pa_s_m3 : float, optional
        Hole resistance, Pa s/m^3 (``holes.resistance``).
    flow : float, optional
        Jet velocity out of the holes relative to the orifice law (``holes.flow``; 0: still gas).
    modes : list of dict, optional
        Measured modes ``{"frequency_hz", "q", "level_db"}`` for ``[measured]``.
    measured_extra : dict, optional
        More ``[measured]`` entries (fit summary).
    response_freq_hz, response_db : sequence, optional
        Measured relative drive response for ``[drive]``.
    reference : dict, optional
        ``{"reference_frequency": Hz, "reference_level": dBFS, "reference_pressure": Pa}``, and
        ``"reference_temperature_k"``: the gas temperature of the reading, K (written in C).
    prefer_gas : str
        ``"air_fraction"`` or ``"temperature"`` (see module docstring).
    today : str, optional
        Date written, ISO format (default: today).
    temperature_k : float, optional
        The gas temperature while the sweep was recorded, K (already through the conditions'
        door), when not the rig file's: it becomes ``gas.temperature``, the fitted sound speed
        is written for it, and a calibration reading without ``drive.reference_temperature``
        keeps the gas it was read in (the file's old temperature, written there).
    """
    import tomlkit

    from showkit.fileio import read_rig_text

    _all_finite({"sound_speed": sound_speed_m_s, "end_correction": end_correction,
                 "resistance": resistance_pa_s_m3, "modes": modes, "measured": measured_extra,
                 "response_frequencies": response_freq_hz, "response_db": response_db,
                 "reference": reference})
    path = _writable(path)
    text = read_rig_text(path, RigError, "give the rig file to update with --rig")
    # unchecked calibration: a refused one is what a new reading replaces (the new one was checked)
    rig = parse_rig(text, str(path), path, check_calibration=False)
    doc = tomlkit.parse(text)
    rig = _move_gas(doc, rig, temperature_k)
    notes = _write_gas(doc, rig, sound_speed_m_s, prefer_gas)
    _write_holes(doc, rig, end_correction, resistance_pa_s_m3, flow)
    _write_drive(doc, response_freq_hz, response_db, reference)
    if modes is not None or measured_extra:
        _write_measured(doc, modes, measured_extra, notes, today)
    return save_text(path, tomlkit.dumps(doc))


def _move_gas(doc, rig, temperature_k: float | None):
    """``gas.temperature`` moved to the measurement's (K), the calibration reading left in the gas it
    was read in; the rig in the measurement's gas (unchanged without one, or within
    :data:`~showkit.rigfile.CALIBRATION_SAME_GAS_K`)."""
    if temperature_k is None or abs(temperature_k - rig.temperature_k) <= CALIBRATION_SAME_GAS_K:
        return rig
    drive = doc.get("drive")
    if drive is not None and "reference_pressure" in drive and "reference_temperature" not in drive:
        drive["reference_temperature"] = f"{rig.calibration_temperature_k - 273.15:.2f} C"
    doc["gas"]["temperature"] = f"{temperature_k - 273.15:.2f} C"
    return rig.with_conditions(temperature_k=temperature_k)


def _write_gas(doc, rig, sound_speed_m_s, prefer_gas: str) -> list:
    """The fitted sound speed (m/s) as ``gas.air_fraction`` or ``gas.temperature``; the key written."""
    notes = []
    if sound_speed_m_s is not None:
        key, value = gas_for_sound_speed(rig.fuel, rig.air_fraction, rig.temperature_k,
                                         rig.ambient_pa, sound_speed_m_s, prefer_gas)
        gas = doc["gas"]
        if key == "air_fraction":
            gas["air_fraction"] = round(value, 5)
        else:
            gas["temperature"] = f"{value - 273.15:.2f} C"
            drive = doc.get("drive")
            if drive is not None and "reference_temperature" in drive and rig.calibrated_elsewhere:
                # the reading's gas as fitted: the fitted sound speed moved from the file's temperature
                # to the reading's as the model's mixture moves with it, written as an effective
                # temperature too
                target = sound_speed_m_s * rig.calibration_gas.sound_speed_m_s / rig.gas.sound_speed_m_s
                _, at_reading = gas_for_sound_speed(rig.fuel, rig.air_fraction, rig.calibration_temperature_k,
                                                    rig.ambient_pa, target, "temperature")
                drive["reference_temperature"] = f"{at_reading - 273.15:.2f} C"
            elif drive is not None and "reference_temperature" in drive:
                drive["reference_temperature"] = gas["temperature"]  # read in the file's gas: still so
        notes.append(key)
    return notes


def _write_holes(doc, rig, end_correction, resistance_pa_s_m3, flow) -> None:
    """``[holes]``: end correction (hole radii), resistance (Pa s/m^3), flow (relative to the orifice law)."""
    if rig.geometry.hole_count and "holes" in doc:
        if end_correction is not None:
            doc["holes"]["end_correction"] = round(float(end_correction), 4)
        if resistance_pa_s_m3 is not None:
            doc["holes"]["resistance"] = float(f"{resistance_pa_s_m3:.4g}")
        if flow is not None:
            doc["holes"]["flow"] = float(f"{flow:.4g}")


def _write_drive(doc, response_freq_hz, response_db, reference) -> None:
    """``[drive]``: the measured response (Hz, dB) and the calibration point (Hz, dBFS, Pa)."""
    import tomlkit

    if response_freq_hz is not None:
        drive = doc.setdefault("drive", tomlkit.table())
        drive["response_frequencies"] = [round(float(v), 3) for v in response_freq_hz]
        drive["response_db"] = [round(float(v), 2) for v in response_db]
    if reference:
        drive = doc.setdefault("drive", tomlkit.table())
        drive["reference_frequency"] = f"{reference['reference_frequency']:g} Hz"
        drive["reference_level"] = round(float(reference["reference_level"]), 2)
        drive["reference_pressure"] = f"{reference['reference_pressure']:.4g} Pa"
        if reference.get("reference_temperature_k") is not None:
            drive["reference_temperature"] = f"{reference['reference_temperature_k'] - 273.15:.2f} C"


def _write_measured(doc, modes, measured_extra, notes: list, today: str | None) -> None:
    """``[measured]`` replaced: date, how the sound speed was written, the fit summary, the modes
    (Hz, Q, dB)."""
    import tomlkit

    measured = tomlkit.table()
    measured.add(tomlkit.comment("written by showkit measure; the previous file is kept as .bak"))
    measured["date"] = today or _dt.date.today().isoformat()
    if notes:
        measured["sound_speed_written_as"] = notes[0]
    for k, v in (measured_extra or {}).items():
        measured[k] = v
    if modes is not None:
        arr = tomlkit.array()
        for m in modes:
            item = tomlkit.inline_table()
            item.update({"frequency_hz": round(float(m["frequency_hz"]), 3),
                         "q": round(float(m["q"]), 2), "level_db": round(float(m["level_db"]), 2)})
            arr.append(item)
        arr.multiline(True)
        measured["modes"] = arr
    if "measured" in doc:
        del doc["measured"]
    doc["measured"] = measured


def _all_finite(values: dict, where: str = "measurement") -> None:
    """Refuse (RigError) any NaN or infinite number about to be written into a rig file."""
    import math

    def walk(name, value):
        if isinstance(value, dict):
            for k, v in value.items():
                walk(f"{name}.{k}", v)
        elif isinstance(value, (list, tuple)) or type(value).__name__ == "ndarray":
            for k, v in enumerate(list(value)):
                walk(f"{name}[{k}]", v)
        elif isinstance(value, (int, float)) and not isinstance(value, bool) or hasattr(value, "dtype"):
            if not math.isfinite(float(value)):
                raise RigError(f"{name} is not a finite number ({float(value)!r})", where,
                               "nothing was written; measure again")

    for key, value in values.items():
        if value is not None:
            walk(key, value)


def write_fit(path, report: dict, drive_response: bool = True, prefer_gas: str = "air_fraction",
              temperature_k: float | None = None) -> Path:
    """Write a measurement report's fit into a rig file (what ``--update-rig`` does).

    Parameters the data could not determine keep the rig's values; the measured
    modes and the recording's figures go under ``[measured]``; the measured
    drive response into ``[drive]`` unless ``drive_response`` is False;
    ``temperature_k``: the gas temperature of the recording (:func:`update_rig`).
    Returns the backup's path.
    """
    fit = report["fit"]
    undetermined = set(fit["undetermined"])
    d = report["drive_response"]
    extra = {"sound_speed_m_s": round(fit["sound_speed_m_s"], 3),
             "rms_cents": round(fit["rms_cents"], 2),
             "snr_db": round(report["recording"]["snr_db"], 1)}
    losses_known = "resistance" not in undetermined and fit.get("flow_range") is not None
    if losses_known:
        # the loss family narrows to the fit: its loss parameter plus and minus two standard errors
        extra["hole_model"] = fit["hole_model"]
        extra["flow_range"] = [float(f"{v:.4g}") for v in fit["flow_range"]]
        extra["resistance_range"] = [float(f"{v:.4g}") for v in fit["resistance_range"]]
    return update_rig(
        path, sound_speed_m_s=fit["sound_speed_m_s"],
        end_correction=None if "end_correction" in undetermined else fit["end_correction"],
        resistance_pa_s_m3=None if "resistance" in undetermined else fit["resistance_pa_s_m3"],
        flow=fit.get("flow") if losses_known else None,
        modes=report["modes"],
        measured_extra=extra,
        response_freq_hz=d["frequency_hz"] if drive_response else None,
        response_db=d["db"] if drive_response else None, prefer_gas=prefer_gas, temperature_k=temperature_k)
