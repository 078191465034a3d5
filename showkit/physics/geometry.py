"""Geometry of a flame tube: the pipe and its row of holes (SI, no physics).

Positions are measured from the driven end (the membrane, x = 0) towards the
rigid cap (x = length_m).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np


def inner_end_correction(hole_radius_m: float, bore_radius_m: float) -> float:
    """Inner end correction of a side hole, m.

    ``t_i = b (0.82 - 0.193 d - 1.09 d^2 + 1.27 d^3 - 0.71 d^4)``, ``d = b / a``
    (J.-P. Dalmont, C. J. Nederveen & N. Joly, J. Sound Vib. 244(3), 505-534,
    2001; the form used by openwind and by Lefebvre & Scavone, JASA 131, 2012).
    """
    d = hole_radius_m / bore_radius_m
    return hole_radius_m * (0.82 - 0.193 * d - 1.09 * d ** 2 + 1.27 * d ** 3 - 0.71 * d ** 4)


#: Outer (radiation) end correction of an unflanged opening, in hole radii
#: (H. Levine & J. Schwinger, Phys. Rev. 73, 383-406, 1948).
UNFLANGED_END_CORRECTION = 0.6133


@dataclass(frozen=True)
class TubeGeometry:
    """A straight pipe with a row of identical holes.

    Attributes
    ----------
    length_m : float
        Inner length from the membrane to the rigid cap, m.
    bore_m : float
        Inner diameter, m.
    wall_m : float
        Wall thickness at the holes (the hole's own length), m.
    hole_positions_m : tuple of float
        Hole centres from the driven end, m, ascending.
    hole_diameter_m : float
        Hole diameter, m.
    end_correction : float or None
        Total end correction of a hole (inner plus outer) in hole radii;
        ``None`` uses :func:`inner_end_correction` plus the unflanged outer value.
    hole_resistance_pa_s_m3 : float
        Extra acoustic resistance of each hole (flame, outflow), Pa s/m^3,
        in series with its mass.  Fitted by measurement.
    hole_flow_m_s : float
        Mean velocity of the gas jet out of each hole, m/s: the bias flow of
        :mod:`showkit.physics.biasflow` (0: still gas, the inertive hole).
    """

    length_m: float
    bore_m: float
    wall_m: float
    hole_positions_m: tuple[float, ...] = field(default_factory=tuple)
    hole_diameter_m: float = 0.0
    end_correction: float | None = None
    hole_resistance_pa_s_m3: float = 0.0
    hole_flow_m_s: float = 0.0

    @property
    def radius_m(self) -> float:
        return self.bore_m / 2.0

    @property
    def hole_radius_m(self) -> float:
        return self.hole_diameter_m / 2.0

    @property
    def hole_count(self) -> int:
        return len(self.hole_positions_m)

    @property
    def positions(self) -> np.ndarray:
        return np.asarray(self.hole_positions_m, dtype=float)

    @property
    def hole_area_m2(self) -> float:
        return np.pi * self.hole_radius_m ** 2

    @property
    def bore_area_m2(self) -> float:
        return np.pi * self.radius_m ** 2

    @property
    def volume_m3(self) -> float:
        return self.bore_area_m2 * self.length_m

    @property
    def end_correction_m(self) -> float:
        """Inner plus outer end correction of one hole, m."""
        if self.hole_count == 0:
            return 0.0
        if self.end_correction is not None:
            return self.end_correction * self.hole_radius_m
        return (inner_end_correction(self.hole_radius_m, self.radius_m)
                + UNFLANGED_END_CORRECTION * self.hole_radius_m)

    @property
    def effective_hole_length_m(self) -> float:
        """``l_e``: wall thickness plus both end corrections, m (DEVELOPERS.md Methods §4)."""
        return self.wall_m + self.end_correction_m

    @property
    def mean_hole_spacing_m(self) -> float:
        if self.hole_count < 2:
            return float("nan")
        return float(np.mean(np.diff(self.positions)))


def evenly_spaced(count: int, spacing_m: float, first_m: float) -> tuple[float, ...]:
    """Hole centres ``first_m + k spacing_m`` for ``k = 0 .. count - 1``."""
    return tuple(float(first_m + k * spacing_m) for k in range(count))
