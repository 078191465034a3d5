"""The safe-level rule and the drive ceiling (DEVELOPERS.md Methods §7).

The pressure at every hole must stay above ambient by a reserve at every
moment: ``dP0 + g p_i(t) >= m dP0`` for all holes ``i`` and times ``t``.  The
tube is linear, so one pass at unit gain gives the largest swing below the
static level, ``P = max_{i,t} (-p_i(t))`` (bounded by the analytic envelope),
and the ceiling

    g* = (1 - m) dP0 / P

capped so that the output never exceeds digital full scale (and never more
than :data:`MAX_GAIN_DB`).  Ceilings scale exactly with ``dP0`` and with
``1 - m``: today's manometer reading re-derives them without re-analysis.

Fails closed: a swing, peak, static pressure or reserve that is NaN, infinite,
negative or otherwise degenerate raises ``ValueError``; it never falls through
to the full-scale limit.  Only a swing of exactly zero (silence at the holes)
has no pressure limit.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

#: No cue is ever amplified by more than this, dB (also the ceiling of silence).
MAX_GAIN_DB = 60.0


@dataclass(frozen=True)
class Ceiling:
    """A ceiling and what set it.

    Attributes
    ----------
    ceiling_db : float
        Largest safe gain applied to the signal as recorded, dB.
    pressure_db : float
        The pressure rule's ceiling alone, dB (``inf`` for silence).
    full_scale_db : float
        The gain that brings the signal's peak to 0 dBFS, dB (``inf`` for silence).
    limited_by : str
        ``"pressure"`` or ``"full_scale"``.
    """

    ceiling_db: float
    pressure_db: float
    full_scale_db: float
    limited_by: str


def pressure_ceiling_db(swing_pa: float, static_pa: float, reserve: float) -> float:
    """``20 log10((1 - m) dP0 / P)`` for a largest swing ``P`` below the static level, Pa."""
    _check_conditions(static_pa, reserve)
    if not (math.isfinite(swing_pa) and swing_pa >= 0.0):
        raise ValueError(f"the pressure swing must be finite and not negative (got {swing_pa!r})")
    if swing_pa == 0.0:
        return math.inf
    result = 20.0 * math.log10((1.0 - reserve) * static_pa / swing_pa)
    if math.isnan(result):  # pragma: no cover - excluded by the checks above
        raise ValueError("the pressure ceiling is not a number")
    return result


def _check_conditions(static_pa: float, reserve: float) -> None:
    if not (math.isfinite(static_pa) and static_pa > 0):
        raise ValueError(f"static pressure must be finite and positive (got {static_pa!r})")
    if not (math.isfinite(reserve) and 0.0 <= reserve < 1.0):
        raise ValueError(f"reserve must be within 0 and 1 (got {reserve!r})")


def full_scale_db(peak: float) -> float:
    """Gain that brings a digital peak (1.0 = full scale) to 0 dBFS, dB (``inf`` for silence)."""
    if not (math.isfinite(peak) and peak >= 0.0):
        raise ValueError(f"the digital peak must be finite and not negative (got {peak!r})")
    return math.inf if peak == 0 else -20.0 * math.log10(peak)


def combine(pressure_db: float, full_scale_db_: float) -> Ceiling:
    """The lower of the two limits, capped at :data:`MAX_GAIN_DB`.

    Either limit may be ``+inf`` (silence); a NaN or ``-inf`` limit is refused.
    """
    for value in (pressure_db, full_scale_db_):
        if math.isnan(value) or value == -math.inf:
            raise ValueError(f"a ceiling limit must be a number or +inf (got {value!r})")
    if pressure_db <= full_scale_db_ and math.isfinite(pressure_db):
        return Ceiling(min(pressure_db, MAX_GAIN_DB), pressure_db, full_scale_db_, "pressure")
    return Ceiling(min(full_scale_db_, MAX_GAIN_DB), pressure_db, full_scale_db_, "full_scale")


def rescale(ceiling: Ceiling, static_from_pa: float, static_to_pa: float,
            reserve_from: float, reserve_to: float) -> Ceiling:
    """Re-derive a ceiling for another static pressure and reserve, exactly.

    ``g*`` is proportional to ``(1 - m) dP0``; the full-scale limit does not move.
    """
    _check_conditions(static_from_pa, reserve_from)
    _check_conditions(static_to_pa, reserve_to)
    shift = 20.0 * math.log10((1.0 - reserve_to) * static_to_pa / ((1.0 - reserve_from) * static_from_pa))
    return combine(ceiling.pressure_db + shift, ceiling.full_scale_db)
