"""A flame hole with the gas flowing out of it: Howe's bias-flow conductivity.

Gas leaves every hole as a jet of mean velocity ``U = sqrt(2 dP0 / rho)`` (the
orifice law at the static overpressure ``dP0``: a few m/s at 10-30 Pa for
propane).  At safe drive levels the acoustic velocity in a hole is of the same
order, so the hole's impedance depends on that mean flow: the *bias-flow*
regime, set by the Strouhal number ``St = omega a / U`` (hole radius ``a``).

Model
-----
M. S. Howe, "On the theory of unsteady high Reynolds number flow through a
circular aperture", Proc. R. Soc. Lond. A 366, 205-223 (1979): the Rayleigh
conductivity of a circular aperture with a mean flow through it is
``K_R = 2 a (gamma_H - i delta_H)`` (time ``exp(-i omega t)``) with

    gamma_H - i delta_H = 1 + [(pi/2) I1(St) e^-St - i K1(St) sinh St]
                              / (St [(pi/2) I1(St) e^-St + i K1(St) cosh St])

(the form as quoted by J. D. Eldredge & A. P. Dowling, J. Fluid Mech. 485,
307-335, 2003, eq. 2.2; transcribed here from memory and checked against its
limits in ``tests/test_biasflow.py``).  Shed vorticity carries acoustic energy
away: at ``St -> inf`` the conductivity is the inviscid ``2a`` (a pure mass),
at ``St -> 0`` it is a resistance ``2 rho U / S`` per unit volume velocity (the
quasi-steady limit).  U is taken as the mean jet velocity, as Hughes & Dowling
(J. Fluid Mech. 218, 299-335, 1990) take the convection velocity of the shed
vortex sheet.

A flame-tube wall is not thin (2 mm against a 0.8 mm hole radius).  Following
X. Jing & X. Sun, "Experimental investigations of perforated liners with bias
flow", JASA 106(5), 2436-2441 (1999), the hole's own bore (length = wall
thickness) is a mass in series with the aperture: ``Z = j omega rho (t/S +
1/K_R)``.  Howe's thin-plate ``2a`` is replaced by the hole's own end
corrections, ``K_0 = S / l_ec`` (inner + outer, see
:class:`~showkit.physics.geometry.TubeGeometry`), so that with no flow the model
is exactly the inertive hole: ``K_R = K_0 (gamma_H + j delta_H)`` in this
project's ``exp(+j omega t)`` convention.

Only numpy: ``I1`` and ``K1`` are the polynomial approximations of
Abramowitz & Stegun 9.8.3, 9.8.4, 9.8.7 and 9.8.8 (relative error below
about 3e-7), checked against ``scipy.special`` in the tests.
"""

from __future__ import annotations

import numpy as np


def _i1e(x: np.ndarray) -> np.ndarray:
    """``I1(x) exp(-x)`` for ``x >= 0`` (A&S 9.8.3 and 9.8.4)."""
    x = np.asarray(x, dtype=float)
    small = x <= 3.75
    out = np.empty_like(x)
    t = x[small] / 3.75
    t2 = t * t
    poly = 0.5 + t2 * (0.87890594 + t2 * (0.51498869 + t2 * (0.15084934 + t2 * (
        0.02658733 + t2 * (0.00301532 + t2 * 0.00032411)))))
    out[small] = x[small] * poly * np.exp(-x[small])
    xl = x[~small]
    u = 3.75 / xl
    poly = (0.39894228 + u * (-0.03988024 + u * (-0.00362018 + u * (0.00163801 + u * (
        -0.01031555 + u * (0.02282967 + u * (-0.02895312 + u * (0.01787654 + u * -0.00420059))))))))
    out[~small] = poly / np.sqrt(xl)
    return out


def _k1e(x: np.ndarray) -> np.ndarray:
    """``K1(x) exp(x)`` for ``x > 0`` (A&S 9.8.7 and 9.8.8)."""
    x = np.asarray(x, dtype=float)
    small = x <= 2.0
    out = np.empty_like(x)
    xs = x[small]
    t2 = (xs / 2.0) ** 2
    i1 = _i1e(xs) * np.exp(xs)
    poly = 1.0 + t2 * (0.15443144 + t2 * (-0.67278579 + t2 * (-0.18156897 + t2 * (
        -0.01919402 + t2 * (-0.00110404 + t2 * -0.00004686)))))
    out[small] = (xs * np.log(xs / 2.0) * i1 + poly) / xs * np.exp(xs)
    xl = x[~small]
    u = 2.0 / xl
    poly = 1.25331414 + u * (0.23498619 + u * (-0.03655620 + u * (0.01504268 + u * (
        -0.00780353 + u * (0.00325614 + u * -0.00068245)))))
    out[~small] = poly / np.sqrt(xl)
    return out


def howe_factor(strouhal) -> np.ndarray:
    """``gamma_H + j delta_H``: Howe's bias-flow conductivity over its no-flow value.

    In this project's ``exp(+j omega t)`` convention (Howe writes
    ``gamma - i delta`` with ``exp(-i omega t)``).  ``St = 0`` gives 0 (no
    conductance of mass: a pure resistance remains, see
    :func:`hole_aperture_impedance`); ``St -> inf`` gives 1.

    Parameters
    ----------
    strouhal : array_like
        ``St = omega a / U`` (>= 0; ``inf`` for still gas).
    """
    st = np.asarray(strouhal, dtype=float)
    out = np.ones(st.shape, dtype=complex)
    finite = np.isfinite(st) & (st > 0)
    s = st[finite]
    decay = np.exp(-2.0 * s)
    a = 0.5 * np.pi * _i1e(s)            # (pi/2) I1 e^-St
    k1e = _k1e(s)                        # K1 e^St
    sinh_k = 0.5 * k1e * (1.0 - decay)   # K1 sinh St
    cosh_k = 0.5 * k1e * (1.0 + decay)   # K1 cosh St
    howe = 1.0 + (a - 1j * sinh_k) / (s * (a + 1j * cosh_k))
    out[finite] = np.conj(howe)          # exp(-i omega t) -> exp(+j omega t)
    out[st == 0] = 0.0
    return out


def jet_velocity_m_s(static_pa: float, density_kg_m3: float) -> float:
    """Mean jet velocity out of a hole, ``U = sqrt(2 dP0 / rho)``, m/s (orifice law)."""
    return float(np.sqrt(2.0 * max(static_pa, 0.0) / density_kg_m3))


def hole_aperture_impedance(omega_rad_s, density_kg_m3: float, hole_radius_m: float,
                            end_correction_m: float, flow_m_s: float) -> np.ndarray:
    """The end-correction part of a hole's impedance with a bias flow, Pa s/m^3.

    ``j omega rho / (K_0 (gamma_H + j delta_H))`` with ``K_0 = S / l_ec``; with
    ``flow_m_s = 0`` exactly the mass ``j omega rho l_ec / S``.

    Parameters
    ----------
    omega_rad_s : array_like
        Angular frequencies, rad/s (> 0).
    density_kg_m3 : float
        Density of the gas in the jet, kg/m^3.
    hole_radius_m : float
    end_correction_m : float
        Inner plus outer end correction ``l_ec``, m.
    flow_m_s : float
        Mean jet velocity ``U``, m/s (0: still gas).
    """
    omega = np.asarray(omega_rad_s, dtype=float)
    area = np.pi * hole_radius_m ** 2
    mass = 1j * omega * density_kg_m3 * end_correction_m / area
    if flow_m_s <= 0.0:
        return mass
    st = omega * hole_radius_m / flow_m_s
    factor = howe_factor(st)
    # the St -> 0 limit (2 rho U / S for Howe's 2a) written out where the factor vanishes
    tiny = np.abs(factor) < 1e-12
    safe = np.where(tiny, 1.0, factor)
    z = mass / safe
    if np.any(tiny):
        z = np.where(tiny, 4.0 * density_kg_m3 * flow_m_s * end_correction_m / (np.pi * hole_radius_m * area)
                     + 0j, z)
    return z
