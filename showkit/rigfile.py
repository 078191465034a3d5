"""The rig file: a presenter's description of their tube (TOML).

Reads and checks a rig file into a :class:`Rig` whose fields are SI.  Every
problem is one :class:`~showkit.errors.RigError` line naming the file and the
field.  See the README's "Rig file" section for the fields.
"""

from __future__ import annotations

import difflib
import hashlib
import json
import math
from dataclasses import dataclass, field, replace
from functools import cached_property
from importlib import resources
from pathlib import Path

from showkit import units
from showkit.conditions import REFERENCE_FREQUENCY_MAX_HZ, Conditions, make_calibration, make_conditions
from showkit.errors import InputError, RigError
from showkit.limits import MAX_HOLES
from showkit.physics.biasflow import jet_velocity_m_s
from showkit.physics.drive import DriveCalibration
from showkit.physics.family import STATIC_SPAN, LossFamily, LossPoint, check_reference
from showkit.physics.gas import FUELS, STANDARD_AMBIENT_PA, GasState, gas_state
from showkit.physics.geometry import TubeGeometry, evenly_spaced
from showkit.physics.tube import TubeModel, outflow_resistance
from showkit.tomlfile import parse_toml, read_text

#: Overpressure at which the "outflow" hole resistance is evaluated, Pa.
NOMINAL_FLOW_PRESSURE_PA = 20.0

_FIELDS = {
    "name": None,
    "tube": {"length", "bore", "wall"},
    "holes": {"count", "spacing", "first", "diameter", "positions", "end_correction",
              "resistance", "flow"},
    "gas": {"fuel", "air_fraction", "temperature", "static_pressure", "ambient"},
    "drive": {"reference_frequency", "reference_level", "reference_pressure", "reference_temperature",
              "speaker_resonance", "speaker_q", "response_frequencies", "response_db"},
    "safety": {"reserve"},
    "measured": None,  # written by `showkit measure`: kept as data, read by later tools
}
_REQUIRED = {"tube": ("length", "bore", "wall"), "gas": ("fuel",)}


#: The tables only a rig file has: a TOML file holding one of them (and no cue) is a rig.
RIG_TABLES = tuple(k for k, v in _FIELDS.items() if v is not None)


def looks_like_rig(data: dict) -> bool:
    """Whether parsed TOML ``data`` is a rig file: it holds a rig's own table (``[tube]``,
    ``[holes]``, ``[gas]``, ``[drive]``, ``[safety]``) and no ``[[cue]]`` -- so a rig given where a
    cue sheet is expected is named as such, not reported field by field.

    Parameters
    ----------
    data : dict
        The file's parsed TOML.
    """
    return "cue" not in data and any(isinstance(data.get(k), dict) for k in RIG_TABLES)


def demo_rig_path() -> Path:
    """Path of the bundled demo rig."""
    return Path(str(resources.files("showkit") / "data" / "demo_rig.toml"))


#: A calibration read within this of today's gas temperature was read in today's gas, K (the modes
#: move 3 cents per kelvin: a rig file's "70 F" and a reading written back as "21.11 C" are one gas).
CALIBRATION_SAME_GAS_K = 0.01


@dataclass(frozen=True)
class Rig:
    """A checked rig in SI units.

    Attributes
    ----------
    name : str
    geometry : TubeGeometry
    fuel : str
    air_fraction : float
        Mole fraction of air in the tube gas.
    conditions : Conditions
        Static pressure, gas temperature and reserve (the rig file's, or today's
        through :meth:`with_conditions`); ``static_pa``, ``temperature_k`` and
        ``reserve`` read them.
    ambient_pa : float
        Ambient absolute pressure, Pa.
    drive : DriveCalibration
    path : Path or None
    measured : dict
        The ``[measured]`` section as written by measurement, or empty.
    loss_family : LossFamily or None
        The tubes the ceilings must be safe for (:mod:`showkit.physics.family`);
        ``geometry`` holds its best estimate.  Set from the rig file's static
        pressure: today's manometer reading does not change it.  Built for the
        gas at today's temperature (:meth:`with_conditions` builds it again).
    calibration_temperature_k : float or None
        The gas temperature the calibration reading was taken at: the rig file's
        ``drive.reference_temperature``, else its gas temperature.
        Today's temperature moves the modes, not the loudspeaker: the drive (volume
        velocity per unit of digital amplitude) is found from the tube at this
        temperature (:attr:`calibration_gas`) and drives the tube at today's.  None:
        the rig's own temperature.
    family_inputs : FamilyInputs or None
        What the loss family is built from, to build it for another gas temperature.
    """

    name: str
    geometry: TubeGeometry
    fuel: str
    air_fraction: float
    conditions: Conditions
    ambient_pa: float
    drive: DriveCalibration
    path: Path | None = None
    measured: dict = field(default_factory=dict, compare=False, hash=False)
    loss_family: LossFamily | None = field(default=None, compare=False, hash=False)
    calibration_temperature_k: float | None = None
    family_inputs: "FamilyInputs | None" = field(default=None, compare=False, hash=False, repr=False)

    @cached_property
    def gas(self) -> GasState:
        # the static overpressure (tens of Pa) changes the density by ~0.02 %:
        # left out, so that the acoustic model does not depend on it
        return gas_state(self.fuel, self.air_fraction, self.temperature_k, self.ambient_pa)

    @cached_property
    def model(self) -> TubeModel:
        return TubeModel(self.geometry, self.gas)

    @property
    def calibrated_elsewhere(self) -> bool:
        """Whether today's gas temperature differs from the one the calibration was read at."""
        t = self.calibration_temperature_k
        return t is not None and abs(t - self.temperature_k) > CALIBRATION_SAME_GAS_K

    def describe_drive(self, brief: bool = False) -> str:
        """One line saying which calibration and drive model the levels rest on (``brief``: in a few
        words), with the gas temperature the reading was taken in when it is not the rig's (today's)."""
        text = self.drive.brief() if brief else self.drive.describe()
        if self.calibrated_elsewhere:
            head, sep, tail = text.partition("; ")
            text = f"{head}, read in gas at {self.calibration_temperature_k - 273.15:.1f} C{sep}{tail}"
        return text

    @cached_property
    def calibration_gas(self) -> GasState:
        """The tube gas as it was when the calibration reading was taken (the rig file's temperature)."""
        if not self.calibrated_elsewhere:
            return self.gas
        return gas_state(self.fuel, self.air_fraction, self.calibration_temperature_k, self.ambient_pa)

    def calibration_model(self, model: TubeModel) -> TubeModel:
        """``model`` (a member of the loss family, today's gas) with the calibration's gas: the tube the
        drive scale is read from (:func:`showkit.physics.response.drive_scale`).  The member keeps its
        loss point; at the calibration frequency the losses move the cap reading by at most
        :data:`showkit.physics.family.REFERENCE_LIMIT_DB` (checked when the rig file is read)."""
        if not self.calibrated_elsewhere:
            return model
        return TubeModel(model.geometry, self.calibration_gas)

    @property
    def static_pa(self) -> float:
        """Static overpressure above ambient (manometer reading), Pa."""
        return self.conditions.static_pa

    @property
    def temperature_k(self) -> float:
        """Gas temperature in the tube, K."""
        return self.conditions.temperature_k

    @property
    def reserve(self) -> float:
        """Fraction of ``static_pa`` kept in reserve at every hole (0 to 0.9)."""
        return self.conditions.reserve

    def with_conditions(self, static_pa=None, temperature_k=None, reserve=None, *,
                        conditions: Conditions | None = None, where: dict | None = None) -> "Rig":
        """A copy with today's static pressure, gas temperature or reserve.

        Every value goes through :func:`showkit.conditions.make_conditions` (numbers
        in SI or text with units); ``None`` keeps the rig's.  ``conditions`` replaces
        all three at once.  Raises :class:`~showkit.errors.InputError` for a value
        outside the limits.
        """
        if conditions is None:
            conditions = make_conditions(static_pa, temperature_k, reserve, base=self.conditions, where=where)
        elif not isinstance(conditions, Conditions):
            raise TypeError(conditions)
        if conditions == self.conditions:
            return self
        rig = replace(self, conditions=conditions)
        if conditions.temperature_k != self.temperature_k and self.family_inputs is not None:
            # the modes and the losses follow today's gas; the calibration stays the file's
            family = self.family_inputs.build(rig.gas)
            rig = replace(rig, geometry=family.best_model.geometry, loss_family=family)
        return rig

    def acoustic_fields(self) -> dict:
        """Everything that shapes the tube's response (not static pressure or reserve)."""
        g = self.geometry
        return {
            "length_m": g.length_m, "bore_m": g.bore_m, "wall_m": g.wall_m,
            "holes_m": list(g.hole_positions_m), "hole_diameter_m": g.hole_diameter_m,
            "end_correction": g.end_correction,
            "hole_resistance_pa_s_m3": g.hole_resistance_pa_s_m3,
            "hole_flow_m_s": g.hole_flow_m_s,
            "loss_family": [[[p.flow_m_s, p.resistance_pa_s_m3] for p in branch]
                            for branch in (self.loss_family.branches if self.loss_family else ())],
            "fuel": self.fuel, "air_fraction": self.air_fraction,
            "temperature_k": self.temperature_k, "ambient_pa": self.ambient_pa,
        }

    def acoustic_hash(self) -> str:
        """Hash of :meth:`acoustic_fields` (hex, 16 characters)."""
        return _hash(self.acoustic_fields())

    def calibration_fields(self) -> dict:
        d = self.drive
        fields = {"reference_frequency_hz": d.reference_frequency_hz,
                  "reference_level_dbfs": d.reference_level_dbfs,
                  "reference_pressure_pa": d.reference_pressure_pa,
                  "speaker_resonance_hz": d.speaker_resonance_hz, "speaker_q": d.speaker_q,
                  "response_freq_hz": list(d.response_freq_hz),
                  "response_db": list(d.response_db)}
        if self.calibrated_elsewhere:  # today's gas differs: the same reading gives another drive
            fields["calibration_temperature_k"] = self.calibration_temperature_k
        return fields

    def calibration_hash(self) -> str:
        return _hash(self.calibration_fields())


def _hash(data: dict) -> str:
    text = json.dumps(data, sort_keys=True, default=repr)
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def load_rig(path: str | Path | None = None, check_calibration: bool = True) -> Rig:
    """Read and check a rig file; ``None`` loads the bundled demo rig.

    ``check_calibration=False`` skips the calibration-point check (only for
    ``showkit measure level``, which is how a refused calibration is replaced).

    Raises
    ------
    RigError
        One line naming the file and field, for every kind of bad input.
    """
    path = demo_rig_path() if path is None else Path(path)
    text = read_text(path, "rig file", RigError, "check the path, or leave out --rig to use the demo rig")
    return parse_rig(text, str(path), path, check_calibration)


def parse_rig(text: str, where: str = "rig", path: Path | None = None,
              check_calibration: bool = True) -> Rig:
    """Check the TOML text of a rig file (see :func:`load_rig`)."""
    data = parse_toml(text, where, RigError)
    try:
        return _build(data, where, path, check_calibration)
    except InputError as exc:
        raise RigError(exc.what, exc.where, exc.fix) from None


def _field(where: str, section: str, key: str) -> str:
    return f"{where}: {section}.{key}" if section else f"{where}: {key}"


def _check_keys(data: dict, where: str) -> None:
    for key, value in data.items():
        if key not in _FIELDS:
            near = difflib.get_close_matches(key, list(_FIELDS), n=1)
            raise RigError(f"unknown field {key!r}", f"{where}: {key}",
                           f"did you mean {near[0]!r}?" if near else
                           f"the rig file has: {', '.join(_FIELDS)}")
        allowed = _FIELDS[key]
        if allowed is None:
            continue
        if not isinstance(value, dict):
            raise RigError(f"{key!r} must be a section [{key}]", f"{where}: {key}",
                           f"write it as a [{key}] table")
        for sub in value:
            if sub not in allowed:
                near = difflib.get_close_matches(sub, sorted(allowed), n=1)
                raise RigError(f"unknown field {sub!r} in [{key}]", f"{where}: {key}.{sub}",
                               f"did you mean {near[0]!r}?" if near else
                               f"[{key}] has: {', '.join(sorted(allowed))}")
    for section, keys in _REQUIRED.items():
        for key in keys:
            if key not in data.get(section, {}):
                raise RigError(f"missing field {key!r} in [{section}]", f"{where}: {section}.{key}",
                               f"add {key} = ... under [{section}] (see the README)")


def _number(value, where: str, kind: str = "number") -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"expected a {kind}, got {value!r}", where, "write a plain number")
    if not math.isfinite(value):
        raise InputError(f"{value!r} is not a finite {kind}", where, "give a finite number")
    return float(value)


def _positive(value: float, where: str, what: str) -> float:
    if not (value > 0 and math.isfinite(value)):
        raise InputError(f"{what} must be greater than zero (got {value:g})", where,
                         f"give the {what} of your tube")
    return value


#: Plausible sizes (m): a flame tube is 1 to 4 m long with a 50 to 130 mm bore, 1 to 2 mm holes
#: a few cm apart, in a wall of a few mm.  The limits are generous around that and catch
#: a wrong unit (a bare number is metres: ``length = 3000`` is a 3 km tube).
LENGTH_LIMITS_M = (0.2, 20.0)
BORE_LIMITS_M = (0.01, 0.5)
WALL_LIMITS_M = (0.0001, 0.02)
HOLE_DIAMETER_LIMITS_M = (0.0002, 0.01)
#: Largest extra hole resistance, Pa s/m^3: the outflow resistance of a 1.5 mm hole at
#: 20 Pa is about 5e6; a thousand times that is a closed hole.
MAX_HOLE_RESISTANCE_PA_S_M3 = 5e9

_UNIT_HINT = {"length": '"2.2 m" or "7 ft"', "bore": '"80 mm" or "3 in"', "wall thickness": '"2 mm"',
              "hole diameter": '"1.5 mm"'}


def _length(value, at: str, what: str, limits: tuple[float, float]) -> float:
    """A length in metres within ``limits``; a bare number is metres."""
    metres = _positive(units.length_m(value, at), at, what)
    low, high = limits
    if not low <= metres <= high:
        bare = isinstance(value, (int, float)) and not isinstance(value, bool)
        hint = (f"a bare number is metres: write the unit, e.g. {_UNIT_HINT[what]}" if bare else
                f"check the value and its unit, e.g. {_UNIT_HINT[what]}")
        raise RigError(f"{what} {_metres_text(metres)} is outside the plausible "
                       f"{_metres_text(low)} to {_metres_text(high)} for a flame tube", at, hint)
    return metres


def _metres_text(metres: float) -> str:
    return f"{metres * 1e3:g} mm" if metres < 0.1 else f"{metres:g} m"


def _build(data: dict, where: str, path: Path | None, check_calibration: bool = True) -> Rig:
    _check_keys(data, where)
    name = _name(data, where, path)
    holes, drive = data.get("holes", {}), data.get("drive", {})
    length, bore, wall = _tube(data["tube"], where)
    positions, diameter = _holes(holes, where, length, bore)
    end_corr = _end_correction(holes, where)
    fuel, air, ambient = _fuel_air_ambient(data["gas"], where)
    conditions = _rig_conditions(data["gas"], data.get("safety", {}), where)
    calibration_temperature_k = _reference_temperature(drive, conditions, where)
    calibration = _drive(drive, where)
    gas_now = gas_state(fuel, air, conditions.temperature_k, ambient)
    geometry = TubeGeometry(length, bore, wall, positions, diameter, end_corr, 0.0)
    measured = _measured(data, where)
    inputs = FamilyInputs(geometry, conditions.static_pa, _flow_scale(holes, where), _ranges(measured, where),
                          _hole_resistance(holes, where))
    family = inputs.build(gas_now)
    rig = Rig(name=name, geometry=family.best_model.geometry, fuel=fuel, air_fraction=air,
              conditions=conditions, ambient_pa=ambient, drive=calibration, path=path, measured=measured,
              loss_family=family, calibration_temperature_k=calibration_temperature_k, family_inputs=inputs)
    # checks of the calibration against the tube as it was when the reading was taken (the same
    # door, with the tube): below the plane-wave limit, and where the tube's possible losses do not
    # change the cap pressure
    at_reading = rig.with_conditions(temperature_k=calibration_temperature_k)
    _drive(drive, where, at_reading.model)
    if check_calibration:
        check_calibration_point(at_reading, where, in_gas=(
            f"in the gas of the reading ({calibration_temperature_k - 273.15:.1f} C, drive.reference_temperature)"
            if rig.calibrated_elsewhere else ""))
    return rig


def _name(data: dict, where: str, path: Path | None) -> str:
    name = data.get("name", path.stem if path else "rig")
    if not isinstance(name, str):
        raise RigError(f"expected text, got {name!r}", f"{where}: name", 'write name = "My tube"')
    return name


def _tube(tube: dict, where: str) -> tuple[float, float, float]:
    """``[tube]``: length, bore and wall thickness, m, each within its limits, the bore below the length."""
    length = _length(tube["length"], _field(where, "tube", "length"), "length", LENGTH_LIMITS_M)
    bore = _length(tube["bore"], _field(where, "tube", "bore"), "bore", BORE_LIMITS_M)
    wall = _length(tube["wall"], _field(where, "tube", "wall"), "wall thickness", WALL_LIMITS_M)
    if bore >= length:
        raise RigError(f"bore ({bore:g} m) is not smaller than the length ({length:g} m)",
                       _field(where, "tube", "bore"), "give the inner diameter and the length in the right units")
    return length, bore, wall


def _end_correction(holes: dict, where: str) -> float | None:
    """``holes.end_correction`` in hole radii (0 to 5), or None for the textbook value."""
    if "end_correction" not in holes:
        return None
    end_corr = _number(holes["end_correction"], _field(where, "holes", "end_correction"))
    if not 0.0 <= end_corr <= 5.0:
        raise RigError(f"end_correction must be within 0 and 5 hole radii (got {end_corr:g})",
                       _field(where, "holes", "end_correction"),
                       "leave it out to use the textbook value")
    return end_corr


def _fuel_air_ambient(gas: dict, where: str) -> tuple[str, float, float]:
    """``[gas]``: the fuel's name, the mole fraction of air in it, the absolute ambient pressure (Pa)."""
    fuel = gas["fuel"]
    if not isinstance(fuel, str) or fuel.lower() not in FUELS or fuel.lower() == "n-butane":
        names = [f for f in FUELS if f != "n-butane"]
        near = difflib.get_close_matches(str(fuel).lower(), names, n=1)
        raise RigError(f"unknown fuel {fuel!r}", _field(where, "gas", "fuel"),
                       (f"did you mean {near[0]!r}? " if near else "") + f"use one of: {', '.join(names)}")
    air = _number(gas.get("air_fraction", 0.0), _field(where, "gas", "air_fraction"))
    if not 0.0 <= air <= 0.5:
        raise RigError(f"air_fraction must be within 0 and 0.5 (got {air:g})",
                       _field(where, "gas", "air_fraction"),
                       "give the mole fraction of air mixed into the fuel, e.g. 0.05")
    ambient = units.pressure_pa(gas.get("ambient", STANDARD_AMBIENT_PA), _field(where, "gas", "ambient"))
    if not 50_000.0 <= ambient <= 120_000.0:
        raise RigError(f"ambient pressure {ambient:g} Pa is not an absolute air pressure",
                       _field(where, "gas", "ambient"), 'give the absolute ambient pressure, e.g. "1013 mbar"')
    return fuel.lower(), air, ambient


def _rig_conditions(gas: dict, safety: dict, where: str) -> Conditions:
    """The rig's own conditions (static pressure, gas temperature, reserve) through the one door."""
    return make_conditions(gas.get("static_pressure", "20 Pa"), gas.get("temperature", "20 C"),
                           safety.get("reserve", 0.25),
                           where={"static": _field(where, "gas", "static_pressure"),
                                  "temperature": _field(where, "gas", "temperature"),
                                  "reserve": _field(where, "safety", "reserve")})


#: Farthest a calibration reading's gas temperature may lie from the rig file's, K (this project's
#: choice, no source): a calibration read in another season is plausible, one over 40 K away is
#: more likely a sign or unit slip (each kelvin
#: moves the modes 3 cents and, read in the wrong gas, ceilings by about 0.015 dB on the demo rig).
REFERENCE_TEMPERATURE_SPAN_K = 40.0


def check_reading_temperature(reading_k: float, gas_k: float, where: str) -> None:
    """Refuse a calibration reading's gas temperature farther than
    :data:`REFERENCE_TEMPERATURE_SPAN_K` from the rig file's gas temperature."""
    if abs(reading_k - gas_k) > REFERENCE_TEMPERATURE_SPAN_K:
        raise RigError(f"the calibration reading's gas at {reading_k - 273.15:.1f} C is "
                       f"{abs(reading_k - gas_k):.0f} K from the rig's gas at {gas_k - 273.15:.1f} C (at most "
                       f"{REFERENCE_TEMPERATURE_SPAN_K:.0f} K)", where,
                       "check the sign and the unit; for a tube this far from it, set the rig's gas temperature "
                       "nearer and calibrate again")


def _reference_temperature(drive: dict, conditions: Conditions, where: str) -> float:
    """``drive.reference_temperature``, K: the gas temperature when the calibration reading was
    taken (written by ``showkit measure level --update-rig``), through the conditions' door and
    within :data:`REFERENCE_TEMPERATURE_SPAN_K` of the gas; without it, the rig file's gas temperature."""
    if "reference_temperature" not in drive:
        return conditions.temperature_k
    at = _field(where, "drive", "reference_temperature")
    reading_k = make_conditions(None, drive["reference_temperature"], None, base=conditions,
                                where={"temperature": at}).temperature_k
    check_reading_temperature(reading_k, conditions.temperature_k, at)
    return reading_k


def _hole_resistance(holes: dict, where: str) -> float | None:
    """``holes.resistance``, Pa s/m^3: a value, or None for ``"outflow"`` (from the gas and the
    holes: :meth:`FamilyInputs.resistance_for`)."""
    resistance = holes.get("resistance", 0.0)
    if resistance == "outflow":
        return None
    r_value = units.resistance_pa_s_m3(resistance, _field(where, "holes", "resistance"))
    if r_value < 0:
        raise RigError("resistance must not be negative", _field(where, "holes", "resistance"),
                       'leave it out, or write "outflow" or a value in Pa s/m3')
    if r_value > MAX_HOLE_RESISTANCE_PA_S_M3:
        raise RigError(f"resistance {r_value:g} Pa s/m3 is far above a flame hole's "
                       f"(at most {MAX_HOLE_RESISTANCE_PA_S_M3:g})", _field(where, "holes", "resistance"),
                       'leave it out, or write "outflow" or let showkit measure fit it')
    return r_value


def _measured(data: dict, where: str) -> dict:
    measured = data.get("measured", {})
    if not isinstance(measured, dict):
        raise RigError("'measured' must be a section", f"{where}: measured", "let showkit measure write it")
    return measured


def _flow_scale(holes: dict, where: str) -> float:
    """``holes.flow``: the jet velocity relative to the orifice law (0 to 3)."""
    flow = _number(holes.get("flow", 1.0), _field(where, "holes", "flow"))
    if not 0.0 <= flow <= 3.0:
        raise RigError(f"flow must be within 0 and 3 (got {flow:g})", _field(where, "holes", "flow"),
                       "leave it out (1: the orifice law at the static pressure), or 0 for still gas")
    return flow


@dataclass(frozen=True)
class FamilyInputs:
    """What a rig's loss family is built from, to build it for the gas at another temperature.

    ``geometry`` without hole losses, the rig file's static pressure (the jets'
    speed; today's reading does not change the family), the flow scale, the measured
    ranges (or None) and the hole resistance, Pa s/m^3 (None: ``"outflow"``, from the
    gas's density, so it follows the temperature).
    """

    geometry: TubeGeometry
    static_pa: float
    flow_scale: float
    ranges: tuple | None
    resistance_pa_s_m3: float | None

    def resistance_for(self, gas: GasState) -> float:
        """The holes' resistance in this gas, Pa s/m^3 (``"outflow"``: from its density)."""
        if self.resistance_pa_s_m3 is not None:
            return self.resistance_pa_s_m3
        return (outflow_resistance(gas.density_kg_m3, NOMINAL_FLOW_PRESSURE_PA, self.geometry.hole_area_m2)
                if self.geometry.hole_count else 0.0)

    def build(self, gas: GasState) -> LossFamily:
        r_value = self.resistance_for(gas)
        return loss_family(replace(self.geometry, hole_resistance_pa_s_m3=r_value), gas, self.static_pa,
                           self.flow_scale, self.ranges, r_value)


def loss_family(geometry: TubeGeometry, gas, static_pa: float, flow_scale: float,
                ranges: tuple | None, resistance_pa_s_m3: float) -> LossFamily:
    """The rig's loss family and best estimate (see :mod:`showkit.physics.family`).

    ``flow_scale`` is the jet velocity relative to the orifice law at ``static_pa``;
    ``ranges`` the measured ``(flow_lo, flow_hi, resistance_lo, resistance_hi)``
    (flow as scales), or None before a measurement.
    """
    base = TubeModel(replace(geometry, hole_flow_m_s=0.0, hole_resistance_pa_s_m3=0.0), gas)
    if geometry.hole_count == 0:
        still = LossPoint(0.0, 0.0)
        return LossFamily(base, ((still, still),), still)
    jet = jet_velocity_m_s(static_pa, gas.density_kg_m3)
    best = LossPoint(flow_scale * jet, resistance_pa_s_m3)
    span = STATIC_SPAN ** 0.5  # the jet velocity goes as the square root of the static pressure
    if ranges is not None:
        f_lo, f_hi, r_lo, r_hi = ranges
        branch = (LossPoint(f_lo * jet / span, r_lo), LossPoint(f_hi * jet * span, r_hi))
        return LossFamily(base, (branch,), best, measured=True)
    still = LossPoint(0.0, 0.0)
    top = STATIC_SPAN * static_pa
    flowing = LossPoint(max(flow_scale, 1.0) * jet * span, resistance_pa_s_m3)
    quasi = LossPoint(0.0, max(resistance_pa_s_m3,
                               outflow_resistance(gas.density_kg_m3, top, geometry.hole_area_m2)))
    return LossFamily(base, ((still, flowing), (still, quasi)), best)


def _ranges(measured: dict, where: str) -> tuple | None:
    """The measured loss ranges ``(flow_lo, flow_hi, resistance_lo, resistance_hi)``, or None."""
    if "flow_range" not in measured and "resistance_range" not in measured:
        return None
    out = []
    for key in ("flow_range", "resistance_range"):
        value = measured.get(key)
        if (not isinstance(value, list) or len(value) != 2
                or not all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value)
                or not 0.0 <= value[0] <= value[1] or not all(v < 1e12 for v in value)):
            raise RigError(f"{key} must be two ascending numbers at or above zero (got {value!r})",
                           f"{where}: measured.{key}", "let showkit measure analyse --update-rig write it")
        out += [float(value[0]), float(value[1])]
    return out[0], out[1], out[2], out[3]


def check_calibration_point(rig: Rig, where: str, in_gas: str = "") -> None:
    """Refuse a calibration frequency where the tube's possible losses change the cap pressure
    (``in_gas``: words saying which gas the check was made in, when not the rig's)."""
    check = check_reference(rig.loss_family, rig.drive.reference_frequency_hz, REFERENCE_FREQUENCY_MAX_HZ)
    if not check.ok:
        gas_c = rig.temperature_k - 273.15
        # the frequencies between modes move with the gas: the one named holds for a reading in this gas
        fix = (f"calibrate again at {check.suggestion_hz:g} Hz for a reading in gas at {gas_c:.1f} C (showkit "
               f"measure level --temperature \"{gas_c:.1f} C\" picks it; another day's gas, another frequency)"
               if check.suggestion_hz else "measure the tube first (showkit measure), then calibrate again")
        raise RigError((f"{in_gas}: " if in_gas else "") + check.message(), _field(where, "drive", "reference_frequency"),
                       fix)



def _holes(holes: dict, where: str, length: float, bore: float) -> tuple[tuple[float, ...], float]:
    if not holes:
        return (), 0.0
    if "positions" in holes:
        clash = [k for k in ("count", "spacing", "first") if k in holes]
        if clash:
            raise RigError(f"positions replaces {', '.join(clash)}", _field(where, "holes", "positions"),
                           "give either positions = [...] or count, spacing and first")
        raw = holes["positions"]
        if not isinstance(raw, list):
            raise RigError("positions must be a list", _field(where, "holes", "positions"),
                           'write positions = ["0.1 m", "0.125 m", ...]')
        if len(raw) > MAX_HOLES:
            raise RigError(f"{len(raw)} positions are more holes than a flame tube has (at most {MAX_HOLES})",
                           _field(where, "holes", "positions"), "give one position per hole")
        positions = tuple(units.length_m(v, f"{_field(where, 'holes', 'positions')}[{i}]")
                          for i, v in enumerate(raw))
        if list(positions) != sorted(positions):
            raise RigError("positions must be in order from the driven end",
                           _field(where, "holes", "positions"), "sort the list")
    else:
        count = holes.get("count", 0)
        if isinstance(count, bool) or not isinstance(count, int):
            raise RigError(f"count must be a whole number, got {count!r}", _field(where, "holes", "count"),
                           "write count = 80")
        if count < 0:
            raise RigError(f"count must not be negative (got {count})", _field(where, "holes", "count"),
                           "write the number of holes, or 0 for a plain pipe")
        if count == 0:
            return (), 0.0
        if count > MAX_HOLES:
            raise RigError(f"count {count} is more holes than a flame tube has (at most {MAX_HOLES})",
                           _field(where, "holes", "count"), "give the number of holes in the tube")
        for key in ("spacing", "first", "diameter"):
            if key not in holes:
                raise RigError(f"missing field {key!r} in [holes]", _field(where, "holes", key),
                               f"add {key} = ... under [holes], or count = 0 for a plain pipe")
        spacing = units.length_m(holes["spacing"], _field(where, "holes", "spacing"))
        _positive(spacing, _field(where, "holes", "spacing"), "hole spacing")
        first = units.length_m(holes["first"], _field(where, "holes", "first"))
        positions = evenly_spaced(count, spacing, first)
    if not positions:
        return (), 0.0
    if "diameter" not in holes:
        raise RigError("missing field 'diameter' in [holes]", _field(where, "holes", "diameter"),
                       'add diameter = "1.5 mm" under [holes]')
    diameter = _length(holes["diameter"], _field(where, "holes", "diameter"), "hole diameter",
                       HOLE_DIAMETER_LIMITS_M)
    if diameter > bore / 4.0:
        raise RigError(f"hole diameter {diameter * 1e3:g} mm is not much smaller than the bore "
                       f"({bore * 1e3:g} mm)", _field(where, "holes", "diameter"),
                       "flame holes are a few mm; the model needs them below a quarter of the bore")
    key = "positions" if "positions" in holes else "first"
    if positions[0] - diameter / 2.0 < 0.0 or positions[-1] + diameter / 2.0 > length:
        bad = positions[0] if positions[0] - diameter / 2 < 0 else positions[-1]
        raise RigError(f"a hole at {bad:.4g} m lies outside the tube (0 to {length:g} m)",
                       _field(where, "holes", key),
                       "check first, spacing and count against the tube length")
    gaps = [b - a for a, b in zip(positions, positions[1:])]
    if gaps and min(gaps) <= diameter:
        raise RigError(f"holes overlap: {min(gaps) * 1e3:.3g} mm apart but {diameter * 1e3:g} mm wide",
                       _field(where, "holes", "spacing" if "spacing" in holes else "positions"),
                       "holes must be further apart than their diameter")
    return positions, diameter


def _drive(drive: dict, where: str, tube=None) -> DriveCalibration:
    keys = _FIELDS["drive"] - {"reference_temperature"}  # a condition of the reading: _reference_temperature
    return make_calibration(**{k: drive.get(k) for k in keys}, tube=tube,
                            where={k: _field(where, "drive", k) for k in keys})
