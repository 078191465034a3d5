"""Lossy plane-wave lines: the numerical building blocks of the tube model.

A circular duct of radius ``a`` filled with a gas carries plane waves with a
series impedance ``Z'`` and a shunt admittance ``Y'`` per unit length
(time convention ``exp(+j omega t)``).  The viscous and thermal boundary layers
are modelled with the Zwikker-Kosten "low reduced frequency" solution
(C. Zwikker & C. W. Kosten, *Sound Absorbing Materials*, 1949; D. H. Keefe,
JASA 75(1), 58-62, 1984, eqs. 1-4):

    Z' = j omega rho / (S (1 - F(k_v a)))
    Y' = j omega S / (rho c^2) (1 + (gamma - 1) F(k_t a))

with ``F(z) = 2 J1(z) / (z J0(z))``, ``k_v = sqrt(-j omega rho / mu)`` and
``k_t = k_v sqrt(Pr)``.  For wide tubes this reduces to the boundary-layer
attenuation of Kinsler et al. (DEVELOPERS.md Methods §3).

Only numpy: the Bessel functions of complex argument are a power series for
small ``|z|`` and Hankel's asymptotic expansion for large (Abramowitz & Stegun
9.1.10 and 9.2.5-9.2.10); ``tests/test_lines.py`` checks them against
``scipy.special.jv``.
"""

from __future__ import annotations

import hashlib
import threading
from collections import OrderedDict

import numpy as np

from showkit.physics.gas import GasState

_SERIES_LIMIT = 14.0


def _bessel_series(z: np.ndarray, order: int, terms: int = 60) -> np.ndarray:
    """J_order(z) by its power series (A&S 9.1.10), fine for ``|z| < 14``."""
    half_sq = -(z / 2.0) ** 2
    term = (z / 2.0) ** order / float(np.prod(np.arange(1, order + 1)) if order else 1.0)
    total = term.copy()
    for k in range(1, terms):
        term = term * half_sq / (k * (k + order))
        total = total + term
    return total


def _hankel_ratio(z: np.ndarray) -> np.ndarray:
    """J1(z)/J0(z) for large |z| with Im z < 0, from Hankel's expansions.

    With ``Im z -> -inf`` both Bessel functions are dominated by ``H^(1)``,
    so the ratio is ``H1^(1)(z) / H0^(1)(z)`` (A&S 9.2.7-9.2.10).
    """
    def pq(nu: int):
        mu = 4.0 * nu * nu
        p = np.ones_like(z)
        q = np.zeros_like(z)
        term = np.ones_like(z)
        # P and Q series, 8 terms
        for k in range(1, 17):
            term = term * (mu - (2 * k - 1) ** 2) / (k * 8.0 * z)
            if k % 2 == 1:
                q = q + (term if (k // 2) % 2 == 0 else -term)
            else:
                p = p + (-term if (k // 2) % 2 == 1 else term)
        return p, q

    p0, q0 = pq(0)
    p1, q1 = pq(1)
    # H_nu^(1)(z) ~ sqrt(2/(pi z)) (P + jQ) exp(j(z - nu pi/2 - pi/4))
    return (p1 + 1j * q1) / (p0 + 1j * q0) * np.exp(-1j * np.pi / 2)


def zk_function(z) -> np.ndarray:
    """``F(z) = 2 J1(z) / (z J0(z))`` for complex ``z`` (the Zwikker-Kosten factor).

    Parameters
    ----------
    z : array_like of complex
        ``k a`` with ``k = sqrt(-j omega rho / mu)`` (argument ``-pi/4``).
    """
    z = np.asarray(z, dtype=complex)
    out = np.empty_like(z)
    small = np.abs(z) < _SERIES_LIMIT
    if np.any(small):
        zs = z[small]
        out[small] = 2.0 * _bessel_series(zs, 1) / (zs * _bessel_series(zs, 0))
    if np.any(~small):
        zl = z[~small]
        out[~small] = 2.0 * _hankel_ratio(zl) / zl
    return out


def line_constants(omega_rad_s, radius_m: float, gas: GasState):
    """Series impedance and shunt admittance per metre of a duct.

    Parameters
    ----------
    omega_rad_s : array_like
        Angular frequencies, rad/s (must be > 0).
    radius_m : float
        Duct radius, m.
    gas : GasState
        The gas filling the duct.

    Returns
    -------
    z_per_m, y_per_m : ndarray of complex
        ``Z'`` in Pa s / m^4 and ``Y'`` in m^4 / (Pa s) (acoustic, volume-velocity based),
        read-only.

    Notes
    -----
    The last :data:`MEMO_SIZE` results are kept by the frequencies' bytes, the radius
    and the gas: a rig's loss family asks for the same bore and hole constants once
    per member (the members differ only in the holes' flow and resistance), and the
    Bessel-function ratios were a fifth of its filter design.
    """
    omega = np.asarray(omega_rad_s, dtype=float)
    key = (hashlib.blake2b(omega.tobytes(), digest_size=16).digest(), omega.shape, float(radius_m), gas)
    with _MEMO_LOCK:
        hit = _MEMO.get(key)
        if hit is not None:
            _MEMO.move_to_end(key)
            return hit
    result = _line_constants(omega, radius_m, gas)
    for a in result:
        a.flags.writeable = False
    with _MEMO_LOCK:
        _MEMO[key] = result
        while len(_MEMO) > MEMO_SIZE:
            _MEMO.popitem(last=False)
    return result


#: Results of :func:`line_constants` kept (each two complex arrays of the frequencies).
MEMO_SIZE = 16
_MEMO: OrderedDict = OrderedDict()
_MEMO_LOCK = threading.Lock()


def _line_constants(omega: np.ndarray, radius_m: float, gas: GasState):
    area = np.pi * radius_m ** 2
    rho, c = gas.density_kg_m3, gas.sound_speed_m_s
    kv = np.sqrt(-1j * omega * rho / gas.viscosity_pa_s)
    fv = zk_function(kv * radius_m)
    ft = zk_function(kv * np.sqrt(gas.prandtl) * radius_m)
    z_per_m = 1j * omega * rho / (area * (1.0 - fv))
    y_per_m = 1j * omega * area / (rho * c * c) * (1.0 + (gas.gamma - 1.0) * ft)
    return z_per_m, y_per_m


def propagation(omega_rad_s, radius_m: float, gas: GasState):
    """Propagation constant ``Gamma`` (1/m) and characteristic impedance ``Zc`` (Pa s/m^3).

    ``Re Gamma`` is the attenuation in neper per metre; ``omega / Im Gamma`` the phase speed.
    """
    z, y = line_constants(omega_rad_s, radius_m, gas)
    gamma = np.sqrt(z * y)
    gamma = np.where(gamma.real < 0, -gamma, gamma)
    return gamma, np.sqrt(z / y)


def boundary_layer_attenuation(omega_rad_s, radius_m: float, gas: GasState) -> np.ndarray:
    """Wide-tube wall-loss attenuation in Np/m (Kinsler, Frey, Coppens & Sanders).

    ``alpha = (1 / (a c)) sqrt(omega nu / 2) (1 + (gamma - 1) / sqrt(Pr))``
    """
    omega = np.asarray(omega_rad_s, dtype=float)
    nu = gas.kinematic_viscosity_m2_s
    return (np.sqrt(omega * nu / 2.0) / (radius_m * gas.sound_speed_m_s)
            * (1.0 + (gas.gamma - 1.0) / np.sqrt(gas.prandtl)))
