"""Units at the edges: parse what presenters write into SI numbers.

Inside showkit every quantity is SI and carries its unit in its name
(``length_m``, ``static_pa``, ``temperature_k``).  Files and inputs may give a
plain number (taken as SI) or a string with a unit, e.g. ``"78 mm"``,
``"6 ft 6 in"``, ``"0.1 inH2O"``, ``"0.25 mbar"``, ``"68 F"``.

Conversion factors: inch = 0.0254 m and foot = 0.3048 m exactly (international
yard and pound, 1959); conventional inch of water column = 1000 kg/m^3 x
9.80665 m/s^2 x 0.0254 m = 249.08891 Pa and mm of water = 9.80665 Pa;
1 mbar = 100 Pa; 1 psi = 6894.757 Pa (NIST SP 811, appendix B).
"""

from __future__ import annotations

import math
import re

from showkit.errors import InputError, ShowkitError
from showkit.limits import MAX_VALUE_CHARS

STANDARD_GRAVITY_M_S2 = 9.80665
WATER_DENSITY_KG_M3 = 1000.0
INCH_M = 0.0254
FOOT_M = 0.3048
INCH_WATER_PA = WATER_DENSITY_KG_M3 * STANDARD_GRAVITY_M_S2 * INCH_M
MM_WATER_PA = WATER_DENSITY_KG_M3 * STANDARD_GRAVITY_M_S2 * 1e-3
PSI_PA = 6894.757
ZERO_CELSIUS_K = 273.15

LENGTH_UNITS_M = {
    "m": 1.0, "meter": 1.0, "meters": 1.0, "metre": 1.0, "metres": 1.0,
    "cm": 0.01, "mm": 1e-3,
    "in": INCH_M, "inch": INCH_M, "inches": INCH_M, '"': INCH_M,
    "ft": FOOT_M, "foot": FOOT_M, "feet": FOOT_M, "'": FOOT_M,
}
PRESSURE_UNITS_PA = {
    "pa": 1.0, "hpa": 100.0, "kpa": 1000.0, "mbar": 100.0, "bar": 1e5,
    "inh2o": INCH_WATER_PA, "inwc": INCH_WATER_PA, "inh₂o": INCH_WATER_PA,
    "mmh2o": MM_WATER_PA, "mmwc": MM_WATER_PA, "psi": PSI_PA,
}
FREQUENCY_UNITS_HZ = {"hz": 1.0, "khz": 1000.0}
TIME_UNITS_S = {"s": 1.0, "sec": 1.0, "ms": 1e-3, "min": 60.0}
RESISTANCE_UNITS = {"pa s/m3": 1.0, "pa·s/m3": 1.0, "pa s/m^3": 1.0, "mks ohm": 1.0,
                    "acoustic ohm": 1.0}

_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
#: A fraction as a presenter writes inches: "1/16", "1 1/2" (lengths only).
_FRACTION = r"(?:\d+\s+)?\d+/\d+"


def _terms(text: str, allow_sum: bool) -> list[tuple[float, str]]:
    """Split ``"6 ft 6 in"`` into ``[(6.0, 'ft'), (6.0, 'in')]``.

    Without ``allow_sum`` the text must be one number and one (optional) unit,
    and the unit may hold digits (``inH2O``).
    """
    if not allow_sum:
        match = re.fullmatch(rf"\s*({_NUMBER})\s*(.*?)\s*", text)
        if not match:
            raise ValueError(text)
        return [(float(match.group(1)), match.group(2))]
    pairs = re.findall(rf"\s*({_FRACTION}|{_NUMBER})\s*([A-Za-z\"']*)\s*", text)
    if not pairs or re.sub(r"\s+", "", "".join(n + u for n, u in pairs)) != re.sub(r"\s+", "", text):
        raise ValueError(text)
    if any("/" in n and not u for n, u in pairs):  # "1/16" alone would be metres: a slip for inches
        raise ValueError(text)
    return [(_term_number(n), u) for n, u in pairs]


def _term_number(text: str) -> float:
    """``"6"`` -> 6.0, ``"1/16"`` -> 0.0625, ``"1 1/2"`` -> 1.5 (a fraction of zero is unreadable)."""
    if "/" not in text:
        return float(text)
    *whole, fraction = text.split()
    top, bottom = (int(part) for part in fraction.split("/"))
    if bottom == 0:
        raise ValueError(text)
    return (int(whole[0]) if whole else 0) + top / bottom


def _norm(unit: str) -> str:
    return unit.lower().replace(" ", "").replace("°", "").replace("_", "")


#: How a unit is written in a hint (the tables hold lower case: the parser ignores case).
_UNIT_SPELLING = {"pa": "Pa", "hpa": "hPa", "kpa": "kPa", "inh2o": "inH2O", "inwc": "inWC", "mmh2o": "mmH2O",
                  "mmwc": "mmWC", "hz": "Hz", "khz": "kHz", "pa s/m3": "Pa s/m3"}


def _named_units(table: dict[str, float]) -> set[str]:
    """The table's units a hint names (ASCII words: not the ``"``/``'`` of feet and inches)."""
    return {k for k in table if k.isascii() and k not in ('"', "'")}


def _unit_names(table: dict[str, float]) -> str:
    """The table's units as a hint writes them (``inH2O``, ``hPa``: the spelling of the trade)."""
    return ", ".join(sorted(_UNIT_SPELLING.get(k, k) for k in _named_units(table)))


def _near_unit(unit: str, table: dict[str, float]) -> str:
    """The fix for an unknown unit: the nearest known one (``"inH20"``, a zero for the O, ->
    ``inH2O``) by difflib's ratio, as field typos get, then the list of units."""
    import difflib

    names = {_norm(k): k for k in _named_units(table)}
    near = difflib.get_close_matches(_norm(unit), sorted(names), n=1)
    hint = f"did you mean {_UNIT_SPELLING.get(names[near[0]], names[near[0]])!r}? " if near else ""
    return f"{hint}use one of: {_unit_names(table)}"


def _short_enough(value, kind: str, where: str | None, error: type[ShowkitError] = InputError,
                  fix: str | None = None) -> None:
    """Refuse text too long to be one value (:data:`showkit.limits.MAX_VALUE_CHARS`), quoting only its start."""
    if isinstance(value, str) and len(value) > MAX_VALUE_CHARS:
        raise error(f"a {kind} is too long to read: {quoted(value)}",
                    where, fix or f"write a number and a unit, e.g. {_example(kind)}")


def _with_table(value, table: dict[str, float], kind: str, where: str | None,
                allow_sum: bool = False) -> float:
    _short_enough(value, kind, where)
    if isinstance(value, bool):
        raise InputError(f"expected a {kind}, got {value!r}", where,
                         f"write a number in SI units or a string such as {_example(kind)}")
    if isinstance(value, (int, float)):
        result = float(value)
    elif isinstance(value, str):
        try:
            terms = _terms(value, allow_sum)
        except ValueError:
            raise InputError(f"cannot read {value!r} as a {kind}", where,
                             f"write a number and a unit such as {_example(kind)}") from None
        result = 0.0
        norm_table = {_norm(k): v for k, v in table.items()}
        for number, unit in terms:
            if unit == "":
                if len(terms) > 1:
                    raise InputError(f"{value!r} mixes a bare number with units", where,
                                     f"give every part a unit, e.g. {_example(kind)}")
                factor = 1.0
            else:
                factor = norm_table.get(_norm(unit))
                if factor is None:
                    raise InputError(f"unknown {kind} unit {unit!r} in {value!r}", where,
                                     _near_unit(unit, table))
            result += number * factor
    else:
        raise InputError(f"expected a {kind}, got {type(value).__name__} {value!r}", where,
                         f"write a number in SI units or a string such as {_example(kind)}")
    if not math.isfinite(result):
        raise InputError(f"{value!r} is not a finite {kind}", where, "give a finite number")
    return result


def _example(kind: str) -> str:
    return {
        "length": '"78 mm" or "6 ft 6 in"',
        "pressure": '"25 Pa", "0.1 inH2O" or "0.25 mbar"',
        "temperature": '"20 C", "68 F" or "293.15 K"',
        "frequency": '"110 Hz"',
        "duration": '"12 s", "1:05.5" or 12',
        "acoustic resistance": '"8e6 Pa s/m3"',
    }.get(kind, "a number")


def number_or_text(value):
    """A string that is a plain number becomes that number; any other value is returned as given.

    Command-line options and form fields arrive as text: ``"18"`` is then the SI number 18,
    while ``"18 Pa"`` stays text for the unit parsers (:func:`pressure_pa`, :func:`duration_s`...).
    """
    if isinstance(value, str):
        # the project's own number pattern, not float(): float() also takes "1_000" and any number
        # of digits, which the unit parsers refuse ("nan" and "inf" pass, to be refused as not finite)
        if len(value) <= MAX_VALUE_CHARS and re.fullmatch(rf"\s*(?:{_NUMBER}|[-+]?(?:nan|inf|infinity))\s*",
                                                           value, flags=re.IGNORECASE):
            return float(value)
        return value
    return value


def quoted(text: str, most: int = 24) -> str:
    """``text`` quoted as repr does, cut to its first ``most`` characters with a count when longer."""
    return repr(text) if len(text) <= most else f"{text[:most]!r}... ({len(text)} characters)"


def gain_db(value, where: str | None = None, fix: str = "write a gain in dB, e.g. -12",
            error: type[ShowkitError] = InputError) -> float:
    """A gain in decibels from a number or text such as ``"-12"`` or ``"-12 dB"``.

    Parameters
    ----------
    value : float or str
        The gain, dB; a trailing ``dB`` (any case) is allowed in text.
    where : str, optional
        Where it was given (``"--gain"``, ``"show.toml: cue intro: gain"``), for the error.
    fix : str
        How to write it, for the error.
    error : type
        The :class:`ShowkitError` kind raised (a sheet raises ``SheetError``).
    """
    _short_enough(value, "gain", where, error, fix)
    if isinstance(value, str):
        text = value.strip().lower().removesuffix("db").strip()
        try:
            number = float(text)
        except ValueError:
            raise error(f"cannot read {value!r} as a gain in dB", where, fix) from None
    elif isinstance(value, bool) or not isinstance(value, (int, float)):
        raise error(f"a gain is a number of dB, got {value!r}", where, fix)
    else:
        number = float(value)
    if not math.isfinite(number):
        raise error(f"a gain must be a finite number of dB, got {value!r}", where, fix)
    return number


def length_m(value, where: str | None = None) -> float:
    """A length in metres from a number (metres) or a string with units.

    Feet and inches may be combined: ``"6 ft 6 in"`` is 1.9812 m.
    """
    return _with_table(value, LENGTH_UNITS_M, "length", where, allow_sum=True)


def pressure_pa(value, where: str | None = None) -> float:
    """A pressure difference in pascals from a number (Pa) or a string.

    Accepts Pa, hPa, kPa, mbar, bar, inH2O (inWC), mmH2O (mmWC) and psi.
    """
    return _with_table(value, PRESSURE_UNITS_PA, "pressure", where)


def frequency_hz(value, where: str | None = None) -> float:
    """A frequency in hertz from a number (Hz) or a string (Hz, kHz)."""
    return _with_table(value, FREQUENCY_UNITS_HZ, "frequency", where)


def resistance_pa_s_m3(value, where: str | None = None) -> float:
    """An acoustic resistance in Pa s/m^3 (acoustic ohms, MKS)."""
    return _with_table(value, RESISTANCE_UNITS, "acoustic resistance", where)


def temperature_k(value, where: str | None = None) -> float:
    """An absolute temperature in kelvin.

    A plain number is taken as kelvin (SI).  Strings: ``"20 C"``, ``"68 F"``,
    ``"293.15 K"`` (also ``°C``, ``degC``, ``°F``).
    """
    _short_enough(value, "temperature", where)
    if isinstance(value, str):
        match = re.fullmatch(rf"\s*({_NUMBER})\s*(°?\s*[cCfFkK]|deg\s*[cCfF])?\s*", value)
        if not match:
            raise InputError(f"cannot read {value!r} as a temperature", where,
                             f"write a number and a unit such as {_example('temperature')}")
        number = float(match.group(1))
        unit = _norm(match.group(2) or "k").replace("deg", "")
        kelvin = {"c": number + ZERO_CELSIUS_K,
                  "f": (number - 32.0) * 5.0 / 9.0 + ZERO_CELSIUS_K,
                  "k": number}[unit]
    else:
        kelvin = _with_table(value, {"k": 1.0}, "temperature", where)
    if kelvin <= 0.0:
        raise InputError(f"{value!r} is at or below absolute zero", where,
                         "give the gas temperature, e.g. \"20 C\"")
    return kelvin


def duration_s(value, where: str | None = None) -> float:
    """A time in seconds: a number, ``"12 s"``, ``"250 ms"`` or ``"m:ss.s"``/``"h:mm:ss"``."""
    _short_enough(value, "time", where, fix='write seconds or "m:ss.s", e.g. "1:05.5"')
    if isinstance(value, str) and ":" in value:
        if re.search(r"[-+\u2212]", value):
            # float() reads "-0" as -0.0, which is not below zero: "-0:01" read as +1 s
            raise InputError(f"{value!r} has a sign: a time written as m:ss is never negative", where,
                             'write the time without a sign, e.g. "0:01" or "1:05.5"')
        parts = value.strip().split(":")
        try:
            numbers = [float(p) for p in parts]
        except ValueError:
            raise InputError(f"cannot read {value!r} as a time", where,
                             'write seconds or "m:ss.s", e.g. "1:05.5"') from None
        if len(numbers) > 3 or any(n < 0 for n in numbers) or any(n >= 60 for n in numbers[1:]):
            raise InputError(f"cannot read {value!r} as a time", where,
                             'write seconds or "m:ss.s" with seconds below 60, e.g. "1:05.5"')
        total = 0.0
        for n in numbers:
            total = total * 60.0 + n
        return total
    return _with_table(value, TIME_UNITS_S, "duration", where)


def format_time(seconds: float, round_down: bool = False) -> str:
    """``75.25`` -> ``"1:15.2"`` (minutes, seconds to a tenth): the one m:ss.s formatter.

    Parameters
    ----------
    seconds : float
        The time, s (``"--:--"`` when not finite).
    round_down : bool
        Cut to the tenth below instead of the nearest one: a running clock (the preview
        video's) never shows a tenth that has not yet begun.
    """
    if not math.isfinite(seconds):
        return "--:--"
    sign = "-" if seconds < 0 else ""
    tenths = int(math.floor(abs(seconds) * 10 + 1e-6)) if round_down else int(round(abs(seconds) * 10))
    minutes, rest = divmod(tenths, 600)
    return f"{sign}{minutes}:{rest // 10:02d}.{rest % 10}"


def format_count(count: int, noun: str) -> str:
    """``(1, "cue")`` -> ``"1 cue"``, ``(3, "cue")`` -> ``"3 cues"``: a count with its noun, singular for one.

    Parameters
    ----------
    count : int
        How many.
    noun : str
        The noun in the singular (its plural adds an ``s``).
    """
    return f"{count} {noun}{'' if count == 1 else 's'}"


def agree(count: int, one: str, many: str) -> str:
    """The word that agrees with ``count``: ``agree(1, "needs", "need")`` -> ``"needs"``.

    Parameters
    ----------
    count : int
        How many.
    one, many : str
        The word for one and for any other count.
    """
    return one if count == 1 else many


def format_every(count: int, noun: str) -> str:
    """``(1, "cue")`` -> ``"the one cue"``, ``(5, "cue")`` -> ``"all 5 cues"``: a whole set, counted
    (the parameters as :func:`format_count`'s)."""
    return f"the one {noun}" if count == 1 else f"all {format_count(count, noun)}"


def format_semitones(semitones: float) -> str:
    """``1.58`` -> ``"+1.58 st"``: a transposition, signed, in semitones to the cent.

    The one way a shift is shown (the scan's table, the Track view), so ``+0.50 st``
    and ``+1.58 st`` read alike; the figure (``1.58``) is what ``scan --transpose`` takes.

    Parameters
    ----------
    semitones : float
        The shift, semitones (100 cents each); ``"-"`` when not finite.
    """
    if not math.isfinite(semitones):
        return "-"
    return f"{round(semitones, 2) + 0.0:+.2f} st"  # + 0.0: a shift that rounds to nothing is not "-0.00"


def db(ratio: float) -> float:
    """Amplitude ratio to decibels, ``20 log10(ratio)``; ``-inf`` for zero."""
    return 20.0 * math.log10(ratio) if ratio > 0 else -math.inf


def undb(gain_db: float) -> float:
    """Decibels to amplitude ratio, ``10 ** (gain_db / 20)``."""
    return 10.0 ** (gain_db / 20.0)
