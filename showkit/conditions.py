"""One door for today's conditions and one for the calibration and drive model.

Every number that moves a ceiling comes in through one of two functions:

- :func:`make_conditions` builds :class:`Conditions` -- today's static
  overpressure (the manometer), the gas temperature and the reserve.  The rig
  file's ``[gas]``/``[safety]`` values, every command-line option (``--static``,
  ``--temperature``, ``--reserve``), ``showkit run``, a lock read back from a
  sheet and the terminal UI all go through it.
- :func:`make_calibration` builds the :class:`~showkit.physics.drive.DriveCalibration`
  -- the calibration point and the drive model -- from the rig file's ``[drive]``
  or from ``showkit measure level``.  Checks of a calibration against the tube
  (``tube=``) belong here too, so that there is one place for them.

Both parse units at the edge (:mod:`showkit.units`), refuse anything non-finite
or outside the limits below with one :class:`~showkit.errors.InputError` line
(what, where, the limit, how to fix it), and return frozen values.  The limits
and their reasons are in the README ("Safety limits").  A value outside a limit
is never clamped: it is refused, so a typing slip cannot become a loud ceiling.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from showkit import units
from showkit.errors import InputError
from showkit.physics.drive import DriveCalibration

# ---------------------------------------------------------------- limits
#: Static overpressure above ambient, Pa.  A flame tube runs at a few pascals to a few
#: tens of pascals (a flame a few cm tall needs a few Pa through a 1.5 mm hole, by the
#: orifice law); below 1 Pa a manometer reading is noise, above 500 Pa (5 mbar,
#: 2 inH2O) is a supply-line pressure, not a tube's.  Ceilings scale with it (+6 dB
#: per doubling), so a wrong unit must not pass.
STATIC_MIN_PA, STATIC_MAX_PA = 1.0, 500.0
#: Gas temperature in the tube, K (-40 C to 100 C): propane boils at -42 C, and a
#: tube above 100 C is not at room temperature; the real-gas model is checked in this range.
TEMPERATURE_MIN_K, TEMPERATURE_MAX_K = 233.15, 373.15
#: Reserve: the fraction of the static pressure kept at every hole (0 to 0.9).  At 1
#: no swing at all is allowed (every ceiling -inf dB).
RESERVE_MIN, RESERVE_MAX = 0.0, 0.9

#: Calibration sine frequency, Hz: a tube's plane-wave range starts above 10 Hz and a
#: flame tube's useful modes are below a few kHz.
REFERENCE_FREQUENCY_MIN_HZ, REFERENCE_FREQUENCY_MAX_HZ = 10.0, 5000.0
#: Calibration sine level, dBFS peak: at or below full scale; below -80 dBFS a
#: recording of it is mostly noise.
REFERENCE_LEVEL_MIN_DBFS, REFERENCE_LEVEL_MAX_DBFS = -80.0, 0.0
#: Pressure amplitude read at the cap, Pa (zero to peak): 0.01 Pa is 51 dB SPL rms,
#: far below any audible drive; 2000 Pa is 157 dB SPL, far above a safe one.  A low
#: reading raises every ceiling, so implausibly low values are refused.
REFERENCE_PRESSURE_MIN_PA, REFERENCE_PRESSURE_MAX_PA = 0.01, 2000.0
#: Loudspeaker resonance (drive model), Hz: woofers resonate at about 20 to 200 Hz.
SPEAKER_RESONANCE_MIN_HZ, SPEAKER_RESONANCE_MAX_HZ = 5.0, 1000.0
#: Total Q of the speaker resonance: drivers have about 0.2 to 2.
SPEAKER_Q_MIN, SPEAKER_Q_MAX = 0.1, 10.0
#: Measured drive response: frequencies (Hz) and relative levels (dB).
RESPONSE_FREQUENCY_MIN_HZ, RESPONSE_FREQUENCY_MAX_HZ = 1.0, 24000.0
RESPONSE_DB_LIMIT = 60.0


@dataclass(frozen=True)
class Conditions:
    """Today's conditions, checked (see :func:`make_conditions`).

    Attributes
    ----------
    static_pa : float
        Static overpressure above ambient (manometer reading), Pa.
    temperature_k : float
        Gas temperature in the tube, K.
    reserve : float
        Fraction of ``static_pa`` kept at every hole at every moment.
    """

    static_pa: float
    temperature_k: float
    reserve: float

    def describe(self) -> str:
        return (f"static {self.static_pa:g} Pa, gas {self.temperature_k - 273.15:.1f} C, "
                f"reserve {self.reserve:g}")


_CONDITION_NAMES = {"static": "static pressure", "temperature": "gas temperature", "reserve": "reserve"}


def _where(where: dict | None, key: str, default: str) -> str:
    return (where or {}).get(key, default)


def _finite_number(value, at: str, kind: str) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        if isinstance(value, str):
            number = units.number_or_text(value)
            if isinstance(number, str):
                raise InputError(f"expected a {kind}, got {units.quoted(value)}", at, "write a plain number")
            value = number
        else:
            raise InputError(f"expected a {kind}, got {value!r}", at, "write a plain number")
    value = float(value)
    if not math.isfinite(value):
        raise InputError(f"{value!r} is not a finite {kind}", at, "give a finite number")
    return value


def _within(value: float, low: float, high: float, at: str, what: str, unit: str, fix: str) -> float:
    if not (math.isfinite(value) and low <= value <= high):
        raise InputError(f"{what} {value:g}{unit} is outside {low:g} to {high:g}{unit}", at, fix)
    return value


def check_static_pa(static_pa: float, at: str = "static pressure") -> float:
    """A static overpressure in Pa within the limits (see :data:`STATIC_MIN_PA`)."""
    return _within(static_pa, STATIC_MIN_PA, STATIC_MAX_PA, at, "static pressure", " Pa",
                   'give the manometer reading with its unit, e.g. "22 Pa", "0.09 inH2O" or "0.2 mbar"')


def check_temperature_k(temperature_k: float, at: str = "gas temperature") -> float:
    """A gas temperature in K within the limits (-40 C to 100 C).

    The limits themselves are in: "-40 C" converts to 233.14999999999998 K (the float sum
    -40 + 273.15), so the comparison allows a nanokelvin of rounding (and the value is then
    put on the limit).
    """
    slack = 1e-9
    if not (math.isfinite(temperature_k)
            and TEMPERATURE_MIN_K - slack <= temperature_k <= TEMPERATURE_MAX_K + slack):
        shown = f"{temperature_k - 273.15:.1f} C" if math.isfinite(temperature_k) else repr(temperature_k)
        raise InputError(f"gas temperature {shown} is outside {_TEMPERATURE_SPAN}", at, _TEMPERATURE_FIX)
    return min(max(temperature_k, TEMPERATURE_MIN_K), TEMPERATURE_MAX_K)


_TEMPERATURE_SPAN = f"{TEMPERATURE_MIN_K - 273.15:g} to {TEMPERATURE_MAX_K - 273.15:g} C"
_TEMPERATURE_FIX = ('give the gas temperature with its unit, e.g. "20 C" or "68 F" '
                    "(a plain number is kelvin)")


def check_reserve(reserve: float, at: str = "reserve") -> float:
    """A reserve fraction within 0 and 0.9."""
    return _within(reserve, RESERVE_MIN, RESERVE_MAX, at, "reserve", "",
                   "give the fraction of the static pressure to keep, e.g. 0.25")


def make_conditions(static=None, temperature=None, reserve=None, *, base: Conditions | None = None,
                    where: dict | None = None) -> Conditions:
    """Today's conditions, parsed and checked: the one door for static pressure, gas temperature, reserve.

    Parameters
    ----------
    static : float or str, optional
        Static overpressure: a number (Pa) or text with a unit (``"22 Pa"``, ``"0.09 inH2O"``).
    temperature : float or str, optional
        Gas temperature: a number (K) or text (``"24 C"``, ``"75 F"``).
    reserve : float or str, optional
        Fraction of the static pressure kept at every hole.
    base : Conditions, optional
        Where a value is ``None``, it is taken from here (e.g. the rig file's).
    where : dict, optional
        Where each value came from, for the error line: keys ``"static"``,
        ``"temperature"``, ``"reserve"`` (e.g. ``{"static": "--static"}``).

    Raises
    ------
    InputError
        A value that is not a number, not finite, or outside the limits
        (:data:`STATIC_MIN_PA` .. :data:`STATIC_MAX_PA`, -40 C .. 100 C, 0 .. 0.9).
    """
    values = {}
    for key, raw in (("static", static), ("temperature", temperature), ("reserve", reserve)):
        if raw is None:
            if base is None:
                raise InputError(f"no {_CONDITION_NAMES[key]} given", _where(where, key, _CONDITION_NAMES[key]),
                                 "give it (see the README, Safety limits)")
            values[key] = {"static": base.static_pa, "temperature": base.temperature_k,
                           "reserve": base.reserve}[key]
        else:
            values[key] = raw
    at = {k: _where(where, k, _CONDITION_NAMES[k]) for k in values}
    static_pa = static_reading(values["static"], at["static"])
    temperature_k = temperature_reading(values["temperature"], at["temperature"])
    reserve_v = check_reserve(_finite_number(values["reserve"], at["reserve"], "fraction"), at["reserve"])
    return Conditions(static_pa, temperature_k, reserve_v)


def static_reading(value, where: str = "static pressure") -> float:
    """A static overpressure (number in Pa, or text with a unit) parsed and checked, Pa.

    The part of :func:`make_conditions` for one reading on its own (e.g. a
    command-line option checked before the rig is read).
    """
    return check_static_pa(units.pressure_pa(units.number_or_text(value), where), where)


def temperature_reading(value, where: str = "gas temperature") -> float:
    """A gas temperature (number in K, or text such as ``"24 C"``) parsed and checked, K."""
    try:
        temperature_k = units.temperature_k(units.number_or_text(value), where)
    except InputError as exc:
        if "absolute zero" not in exc.what:
            raise
        raise InputError(f"gas temperature {value!r} is at or below absolute zero, outside {_TEMPERATURE_SPAN}",
                         where, _TEMPERATURE_FIX) from None
    return check_temperature_k(temperature_k, where)


# ---------------------------------------------------------------- calibration
_CALIBRATION_KEYS = ("reference_frequency", "reference_level", "reference_pressure", "speaker_resonance",
                     "speaker_q", "response_frequencies", "response_db")


def make_calibration(reference_frequency=None, reference_level=None, reference_pressure=None,
                     speaker_resonance=None, speaker_q=None, response_frequencies=None,
                     response_db=None, *, base: DriveCalibration | None = None,
                     where: dict | None = None, tube=None) -> DriveCalibration:
    """The calibration point and drive model, parsed and checked: the one door for ``[drive]``.

    Parameters
    ----------
    reference_frequency : float or str
        Frequency of the calibration sine (Hz, or text such as ``"120 Hz"``).
    reference_level : float or str
        Its peak level at the output, dBFS (at or below 0).
    reference_pressure : float or str
        The pressure amplitude (zero to peak) it gives at the rigid cap (Pa, or text).
    speaker_resonance : float or str
        Resonance of the loudspeaker on the membrane, Hz (drive model).
    speaker_q : float
        Total Q of that resonance.
    response_frequencies, response_db : list, optional
        A measured relative drive response: ascending frequencies and their dB.
    base : DriveCalibration, optional
        Where a value is ``None``, it is taken from here (default: the built-in
        defaults of :class:`DriveCalibration`).
    where : dict, optional
        Where each value came from, by the parameter names above, for the error line.
    tube : TubeModel, optional
        The tube the calibration is for; the reference frequency must lie below
        its plane-wave limit (the model says nothing above it).  Further checks
        of a calibration against the tube go here.

    Raises
    ------
    InputError
        A value that is not a number, not finite, outside the limits in this
        module, or response lists that do not match or do not ascend.
    """
    base = base or DriveCalibration()
    given = dict(zip(_CALIBRATION_KEYS, (reference_frequency, reference_level, reference_pressure,
                                         speaker_resonance, speaker_q, response_frequencies, response_db)))
    at = {k: _where(where, k, f"drive.{k}") for k in _CALIBRATION_KEYS}

    def pick(key, default):
        return default if given[key] is None else given[key]

    f_ref, level, p_ref = _calibration_point(pick, base, at)
    f_s, q_s = _speaker_model(pick, base, at)
    rf_hz, rd_db = _drive_response(pick("response_frequencies", list(base.response_freq_hz)),
                                   pick("response_db", list(base.response_db)), at)
    if tube is not None:
        _below_plane_wave_limit(f_ref, tube, at)
    return DriveCalibration(f_ref, level, p_ref, f_s, q_s, rf_hz, rd_db)


def check_reference_frequency(value, at: str = "reference frequency", tube=None) -> float:
    """A calibration sine's frequency, Hz, by the checks of :func:`make_calibration`'s door.

    A number or text such as ``"120 Hz"``, finite, within
    :data:`REFERENCE_FREQUENCY_MIN_HZ` to :data:`REFERENCE_FREQUENCY_MAX_HZ`, and below
    the plane-wave limit of ``tube`` when one is given (the model says nothing above it).
    Checked before any model is evaluated there: a frequency of 1e14 Hz or inf is refused
    for what it is, not through a response that overflows.
    """
    f_ref = _within(units.frequency_hz(units.number_or_text(value), at),
                    REFERENCE_FREQUENCY_MIN_HZ, REFERENCE_FREQUENCY_MAX_HZ, at,
                    "reference frequency", " Hz", 'give the calibration sine\'s frequency, e.g. "120 Hz"')
    if tube is not None:
        _below_plane_wave_limit(f_ref, tube, {"reference_frequency": at})
    return f_ref


def _calibration_point(pick, base, at: dict) -> tuple:
    """``(reference frequency Hz, reference level dBFS, reference pressure Pa)``, parsed and within limits."""
    f_ref = check_reference_frequency(pick("reference_frequency", base.reference_frequency_hz),
                                      at["reference_frequency"])
    level = _finite_number(pick("reference_level", base.reference_level_dbfs), at["reference_level"],
                           "level in dBFS")
    if level > REFERENCE_LEVEL_MAX_DBFS:
        raise InputError(f"reference level {level:g} dBFS is above full scale (0 dBFS)", at["reference_level"],
                         "give the sine's peak level in dBFS, e.g. -20")
    _within(level, REFERENCE_LEVEL_MIN_DBFS, REFERENCE_LEVEL_MAX_DBFS, at["reference_level"],
            "reference level", " dBFS", "give the sine's peak level in dBFS, e.g. -20")
    p_ref = _within(units.pressure_pa(units.number_or_text(pick("reference_pressure", base.reference_pressure_pa)),
                                      at["reference_pressure"]),
                    REFERENCE_PRESSURE_MIN_PA, REFERENCE_PRESSURE_MAX_PA, at["reference_pressure"],
                    "reference pressure", " Pa", 'give the pressure amplitude read at the cap, e.g. "6 Pa"')
    return f_ref, level, p_ref


def _speaker_model(pick, base, at: dict) -> tuple:
    """``(speaker resonance Hz, speaker Q)``, parsed and within limits."""
    f_s = _within(units.frequency_hz(units.number_or_text(pick("speaker_resonance", base.speaker_resonance_hz)),
                                     at["speaker_resonance"]),
                  SPEAKER_RESONANCE_MIN_HZ, SPEAKER_RESONANCE_MAX_HZ, at["speaker_resonance"],
                  "speaker resonance", " Hz", 'give the speaker\'s resonance, e.g. "55 Hz"')
    q_s = _within(_finite_number(pick("speaker_q", base.speaker_q), at["speaker_q"], "number"),
                  SPEAKER_Q_MIN, SPEAKER_Q_MAX, at["speaker_q"], "speaker Q", "",
                  "give the speaker's total Q, e.g. 0.7")
    return f_s, q_s


def _drive_response(rf, rd, at: dict) -> tuple:
    """A measured relative drive response ``(frequencies Hz, levels dB)``: lists of one length,
    ascending, within limits."""
    if not isinstance(rf, (list, tuple)) or not isinstance(rd, (list, tuple)) or len(rf) != len(rd):
        raise InputError("response_frequencies and response_db must be lists of the same length",
                         at["response_db"], "let showkit measure write them")
    if len(rf) == 1:
        raise InputError("a measured drive response needs at least two points", at["response_frequencies"],
                         "let showkit measure write them, or remove both lists")
    rf_hz = tuple(_within(units.frequency_hz(v, at["response_frequencies"]), RESPONSE_FREQUENCY_MIN_HZ,
                          RESPONSE_FREQUENCY_MAX_HZ, at["response_frequencies"], "response frequency", " Hz",
                          "let showkit measure write them") for v in rf)
    rd_db = tuple(_within(_finite_number(v, at["response_db"], "level in dB"), -RESPONSE_DB_LIMIT,
                          RESPONSE_DB_LIMIT, at["response_db"], "response level", " dB",
                          "let showkit measure write them") for v in rd)
    if any(b <= a for a, b in zip(rf_hz, rf_hz[1:])):
        raise InputError("response_frequencies must ascend", at["response_frequencies"],
                         "let showkit measure write them")
    return rf_hz, rd_db


def _below_plane_wave_limit(f_ref: float, tube, at: dict) -> None:
    """Refuse a reference frequency (Hz) at or above the tube's plane-wave limit."""
    limit = tube.plane_wave_limit_hz
    if f_ref >= limit:
        raise InputError(f"reference frequency {f_ref:g} Hz is above the tube's plane-wave limit "
                         f"({limit:.0f} Hz)", at["reference_frequency"],
                         "calibrate with a lower sine, between the tube's modes")
