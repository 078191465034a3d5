"""The flame tube's acoustic model: transfer matrices along the pipe.

The tube is a chain of lossy plane-wave sections (:mod:`showkit.physics.lines`)
with each hole a shunt impedance; the cap at ``x = L`` is rigid and the
membrane at ``x = 0`` is driven as a volume-velocity source ``U``
(DEVELOPERS.md Methods §3-5).  Starting at the cap with ``p = 1, U = 0`` the
state ``(p, U)`` is carried towards the source:

    [p, U](x - d) = [[cosh(G d), Zc sinh(G d)], [sinh(G d) / Zc, cosh(G d)]] [p, U](x)

and at a hole ``U_left = U_right + p / Z_hole``.  Dividing by the volume
velocity reached at ``x = 0`` gives the pressure at every hole (and at any
probe point) per unit source, ``H_i(omega) = p_i / U_0``, for a whole array of
frequencies at once.  This is the transfer-matrix method as in openwind
(``compute_method='TMM'``), which the tests use as a reference.

A hole's impedance: the viscothermal series impedance of its own short
bore (length = wall thickness), the mass of its end corrections
(:class:`~showkit.physics.geometry.TubeGeometry`) -- with the gas flowing
out of the hole, Howe's bias-flow conductivity in their place
(:mod:`showkit.physics.biasflow`) -- the radiation resistance of an unflanged
opening ``rho c (k b)^2 / (4 S_h)`` (Levine & Schwinger 1948) and an extra
resistance (a rig setting, or fitted by measurement).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from showkit.physics.biasflow import hole_aperture_impedance
from showkit.physics.gas import GasState
from showkit.physics.geometry import TubeGeometry
from showkit.physics.lines import line_constants, propagation

#: Orifice discharge coefficient (handbook value for a sharp-edged orifice).
DISCHARGE_COEFFICIENT = 0.6

#: First cross-mode zero of J1' (Kinsler et al.; Morse & Ingard).
FIRST_CROSS_MODE = 1.8412


def outflow_resistance(density_kg_m3: float, static_pa: float, hole_area_m2: float,
                       discharge: float = DISCHARGE_COEFFICIENT) -> float:
    """Quasi-steady acoustic resistance of a hole with gas flowing out, Pa s/m^3.

    Linearising the orifice law ``dp = rho u^2 / (2 C_d^2)`` about the mean
    outflow at overpressure ``static_pa`` gives ``d(dp)/dU = sqrt(2 rho dp) / (C_d S_h)``.

    Parameters
    ----------
    density_kg_m3 : float
        Gas density, kg/m^3.
    static_pa : float
        Static overpressure driving the outflow, Pa.
    hole_area_m2 : float
        Hole area, m^2.
    discharge : float
        Discharge coefficient ``C_d`` (about 0.6, handbook value).
    """
    return float(np.sqrt(2.0 * density_kg_m3 * static_pa) / (discharge * hole_area_m2))


@dataclass(frozen=True)
class TubeResponse:
    """Frequency response of the tube to a unit volume velocity at the membrane.

    Attributes
    ----------
    freq_hz : ndarray, shape (F,)
    hole_pressure : ndarray of complex, shape (holes, F)
        Pressure at each hole per unit source, Pa per (m^3/s).
    input_impedance : ndarray of complex, shape (F,)
        ``p(0) / U(0)``, Pa s/m^3.
    cap_pressure : ndarray of complex, shape (F,)
        Pressure at the rigid cap per unit source.
    point_pressure : ndarray of complex, shape (points, F)
        Pressure at the probe points asked for, per unit source.
    """

    freq_hz: np.ndarray
    hole_pressure: np.ndarray
    input_impedance: np.ndarray
    cap_pressure: np.ndarray
    point_pressure: np.ndarray


class TubeModel:
    """Façade over the geometry, the gas and the transfer-matrix method.

    Parameters
    ----------
    geometry : TubeGeometry
    gas : GasState
    """

    def __init__(self, geometry: TubeGeometry, gas: GasState):
        self.geometry = geometry
        self.gas = gas

    @property
    def plane_wave_limit_hz(self) -> float:
        """First cross-mode cut-on ``f_c = 1.841 c / (2 pi a)``; the model is valid below it."""
        return FIRST_CROSS_MODE * self.gas.sound_speed_m_s / (2.0 * np.pi * self.geometry.radius_m)

    def hole_impedance(self, omega_rad_s) -> np.ndarray:
        """Series impedance of one hole, Pa s/m^3, for each angular frequency."""
        g, gas = self.geometry, self.gas
        omega = np.asarray(omega_rad_s, dtype=float)
        z_bore, _ = line_constants(omega, g.hole_radius_m, gas)
        k = omega / gas.sound_speed_m_s
        rho_c_s = gas.density_kg_m3 * gas.sound_speed_m_s / g.hole_area_m2
        return (z_bore * g.wall_m
                + hole_aperture_impedance(omega, gas.density_kg_m3, g.hole_radius_m,
                                          g.end_correction_m, g.hole_flow_m_s)
                + rho_c_s * (k * g.hole_radius_m) ** 2 / 4.0
                + g.hole_resistance_pa_s_m3)

    def response(self, freq_hz, points_m=None, hole_impedance=None) -> TubeResponse:
        """Pressure at every hole (and at ``points_m``) per unit volume velocity.

        Parameters
        ----------
        freq_hz : array_like, shape (F,)
            Frequencies, Hz, all > 0.
        points_m : array_like, optional
            Extra probe positions from the driven end, m, within ``[0, L]``.
        hole_impedance : array_like of complex, shape (F,), optional
            The holes' impedance for each entry of ``freq_hz`` instead of
            :meth:`hole_impedance` (evaluates many hole models in one pass: repeat a
            frequency and give one impedance per model).
        """
        g = self.geometry
        freq = np.atleast_1d(np.asarray(freq_hz, dtype=float))
        if np.any(freq <= 0):
            raise ValueError("frequencies must be positive")
        omega = 2.0 * np.pi * freq
        gamma, zc = propagation(omega, g.radius_m, self.gas)
        points = np.atleast_1d(np.asarray([] if points_m is None else points_m, dtype=float))
        z_hole = None
        if g.hole_count:
            z_hole = (self.hole_impedance(omega) if hole_impedance is None
                      else np.broadcast_to(np.asarray(hole_impedance, dtype=complex), omega.shape))

        # stations from the cap towards the source: (position, kind, index)
        stations = [(float(x), 0, i) for i, x in enumerate(g.positions)]
        stations += [(float(x), 1, i) for i, x in enumerate(points)]
        stations.sort(key=lambda s: (-s[0], s[1]))

        p = np.ones_like(omega, dtype=complex)
        u = np.zeros_like(omega, dtype=complex)
        x_here = g.length_m
        hole_p = np.empty((g.hole_count, freq.size), dtype=complex)
        point_p = np.empty((points.size, freq.size), dtype=complex)
        sections: dict = {}   # distance -> its transfer matrix: evenly spaced holes share one (_carry)
        for x, kind, index in stations:
            p, u = _carry(p, u, gamma, zc, x_here - x, sections)
            x_here = x
            if kind == 0:
                hole_p[index] = p
                u = u + p / z_hole
            else:
                point_p[index] = p
        p0, u0 = _carry(p, u, gamma, zc, x_here, sections)
        return TubeResponse(freq_hz=freq, hole_pressure=hole_p / u0,
                            input_impedance=p0 / u0, cap_pressure=1.0 / u0,
                            point_pressure=point_p / u0)


#: Most section matrices one response keeps (3 complex arrays of the frequencies each).
MAX_SECTIONS = 32


def _carry(p, u, gamma, zc, distance_m, sections: dict | None = None):
    """Carry ``(p, U)`` a distance towards the source along a uniform section.

    The section's transfer matrix ``[[cosh gd, Zc sinh gd], [sinh gd / Zc, cosh gd]]``
    is kept in ``sections`` by distance (at most :data:`MAX_SECTIONS` of them: memory
    stays bounded for uneven rows), so a row of equally spaced holes evaluates the
    hyperbolic functions once (the same products in the same order: the same bits).
    """
    if distance_m <= 0.0:
        return p, u
    matrix = None if sections is None else sections.get(distance_m)
    if matrix is None:
        gd = gamma * distance_m
        ch, sh = np.cosh(gd), np.sinh(gd)
        matrix = (ch, zc * sh, sh / zc)
        if sections is not None and len(sections) < MAX_SECTIONS:
            sections[distance_m] = matrix
    ch, zsh, sh_z = matrix
    return ch * p + zsh * u, sh_z * p + ch * u
