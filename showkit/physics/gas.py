"""Gas properties of the fuel in the tube, with air mixed in.

Model
-----
A truncated virial equation of state in the Leiden form, ``Z = 1 + B(T) rho``,
with every thermodynamic derivative taken exactly from its residual Helmholtz
energy ``a_r / RT = B rho``.  This captures the real-gas effect that matters
here (propane's sound speed is about 1.2 % below the ideal-gas value at 20 C,
1 atm; DEVELOPERS.md Methods §2).

- ``B(T)`` of each species: Tsonopoulos corresponding-states correlation
  (C. Tsonopoulos, AIChE J. 20(2), 263-272, 1974), with the critical constants
  and acentric factors of the reference equations of state (as tabulated in
  CoolProp 8.0's fluid files).
- Cross coefficients ``B_ij``: Prausnitz combining rules
  (``T_cij = sqrt(T_ci T_cj)``, ``V_cij = ((V_ci^1/3 + V_cj^1/3)/2)^3``,
  ``Z_cij = (Z_ci + Z_cj)/2``, ``omega_ij = (omega_i + omega_j)/2``; Poling,
  Prausnitz & O'Connell, *The Properties of Gases and Liquids*, 5th ed., 4-13).
- Ideal-gas heat capacity ``cp0(T)``: a quadratic in ``(T - 300 K)/100 K``
  fitted to CoolProp 8.0's ideal-gas part over 250-350 K
  (``tests/reference/make_gas_data.py`` remakes the table); mixtures mole-weighted.
- Viscosity and thermal conductivity: each species' value at 293.15 K from
  CoolProp 8.0 with a power law in T, mixed by Wilke's rule (viscosity) and the
  Wassiljewa/Mason-Saxena rule (conductivity), Poling et al. ch. 9-10.  These
  only set the small wall losses.

Checked against CoolProp in ``tests/test_gas.py`` (sound speed and density
within 0.5 % from 0 to 50 C and air fractions up to 0.3).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

R_J_MOL_K = 8.314462618  # molar gas constant, CODATA 2018
STANDARD_AMBIENT_PA = 101325.0

# name: (molar mass kg/mol, Tc K, Pc Pa, acentric factor, critical molar density mol/m^3,
#        cp0/R quadratic coefficients (c0, c1, c2) in u = (T - 300)/100,
#        viscosity Pa s at 293.15 K, its temperature exponent,
#        thermal conductivity W/(m K) at 293.15 K, its temperature exponent)
# Values from CoolProp 8.0 (reference EOS and transport correlations), made by
# tests/reference/make_gas_data.py.
_SPECIES = {
    "propane": (0.044096, 369.890, 4251165, 0.15210, 5000.0,
                (8.86382, 2.33808, 0.13418), 8.0113e-06, 0.986, 1.7763e-02, 1.791),
    "n-butane": (0.058122, 425.125, 3796000, 0.20081, 3922.77,
                 (11.90071, 3.02429, 0.19835), 7.2791e-06, 1.016, 1.6073e-02, 1.779),
    "isobutane": (0.058122, 407.810, 3629000, 0.18353, 3879.76,
                  (11.68349, 3.25079, 0.13123), 7.3744e-06, 0.981, 1.6365e-02, 1.854),
    "methane": (0.016043, 190.564, 4599200, 0.01142, 10139.14,
                (4.30311, 0.44695, 0.16260), 1.1037e-05, 0.847, 3.3448e-02, 1.211),
    "ethane": (0.030069, 305.322, 4872200, 0.09900, 6856.89,
               (6.33806, 1.44379, 0.14182), 9.2071e-06, 0.936, 2.0357e-02, 1.794),
    "nitrogen": (0.028013, 126.192, 3395800, 0.03720, 11183.90,
                 (3.50307, 0.00634, 0.00623), 1.7573e-05, 0.774, 2.5473e-02, 0.835),
    "oxygen": (0.031999, 154.599, 5046411, 0.02220, 13342.19,
               (3.53422, 0.05941, 0.03010), 2.0273e-05, 0.803, 2.5946e-02, 0.892),
    "argon": (0.039948, 150.687, 4863001, -0.00219, 13407.43,
              (2.50001, 0.0, 0.0), 2.2307e-05, 0.835, 1.7496e-02, 0.836),
    "carbon-dioxide": (0.044010, 304.128, 7377298, 0.22394, 10624.91,
                       (4.47715, 0.54860, -0.05275), 1.4675e-05, 0.958, 1.6251e-02, 1.372),
}

#: Dry air as the pseudo-pure "Air" of Lemmon et al. (J. Phys. Chem. Ref. Data 29, 2000).
AIR = {"nitrogen": 0.7812, "oxygen": 0.2096, "argon": 0.0092}

#: Fuels a rig may name, as mole fractions.  Natural gas is a typical pipeline
#: composition (common practice, no source); real supplies vary by region.
FUELS = {
    "propane": {"propane": 1.0},
    "butane": {"n-butane": 1.0},
    "n-butane": {"n-butane": 1.0},
    "isobutane": {"isobutane": 1.0},
    "methane": {"methane": 1.0},
    "natural-gas": {"methane": 0.95, "ethane": 0.03, "propane": 0.005,
                    "nitrogen": 0.01, "carbon-dioxide": 0.005},
    "air": dict(AIR),
}


@dataclass(frozen=True)
class GasState:
    """Properties of the gas in the tube at one temperature and pressure.

    All SI: ``sound_speed_m_s``, ``density_kg_m3``, ``gamma`` (cp/cv, real gas),
    ``viscosity_pa_s``, ``prandtl``, ``molar_mass_kg_mol``, ``temperature_k``,
    ``pressure_pa`` (absolute), ``compressibility`` (Z).
    """

    sound_speed_m_s: float
    density_kg_m3: float
    gamma: float
    viscosity_pa_s: float
    prandtl: float
    molar_mass_kg_mol: float
    temperature_k: float
    pressure_pa: float
    compressibility: float

    @property
    def kinematic_viscosity_m2_s(self) -> float:
        return self.viscosity_pa_s / self.density_kg_m3


def mixture(fuel: str, air_fraction: float = 0.0) -> dict[str, float]:
    """Mole fractions of ``fuel`` with a mole fraction ``air_fraction`` of dry air.

    Parameters
    ----------
    fuel : str
        One of :data:`FUELS`.
    air_fraction : float
        Mole fraction of air mixed into the fuel, 0 to 1.
    """
    if fuel not in FUELS:
        raise ValueError(f"unknown fuel {fuel!r}")
    if not 0.0 <= air_fraction <= 1.0:
        raise ValueError("air_fraction must be within 0 and 1")
    result: dict[str, float] = {}
    for part, share in ((FUELS[fuel], 1.0 - air_fraction), (AIR, air_fraction)):
        for name, x in part.items():
            result[name] = result.get(name, 0.0) + share * x
    return {k: v for k, v in result.items() if v > 0.0}


def _tsonopoulos(tr: float) -> tuple[np.ndarray, np.ndarray]:
    """f0, f1 of the Tsonopoulos correlation and their first two Tr-derivatives."""
    # f = sum a_k Tr^-k, k = 0, 1, 2, 3, 8
    k = np.array([0, 1, 2, 3, 8], dtype=float)
    a0 = np.array([0.1445, -0.330, -0.1385, -0.0121, -0.000607])
    a1 = np.array([0.0637, 0.0, 0.331, -0.423, -0.008])
    powers = tr ** (-k)
    d1 = -k * tr ** (-k - 1)
    d2 = k * (k + 1) * tr ** (-k - 2)
    return (np.array([a0 @ powers, a0 @ d1, a0 @ d2]),
            np.array([a1 @ powers, a1 @ d1, a1 @ d2]))


#: Binary interaction parameters k_ij for T_cij of hydrocarbon / air-gas pairs
#: (of the order 0.03-0.1 reported for such pairs by Tsonopoulos 1974; the values
#: here are from memory, rounded).  Pairs not listed: 0.
_AIR_GASES = ("nitrogen", "oxygen", "argon")
_K_HYDROCARBON_AIR = {"methane": 0.03, "ethane": 0.05, "propane": 0.07,
                      "n-butane": 0.08, "isobutane": 0.08}


def _binary_k(a: str, b: str) -> float:
    if a in _AIR_GASES and b in _K_HYDROCARBON_AIR:
        return _K_HYDROCARBON_AIR[b]
    if b in _AIR_GASES and a in _K_HYDROCARBON_AIR:
        return _K_HYDROCARBON_AIR[a]
    return 0.0


def _second_virial(names: list[str], x: np.ndarray, temperature_k: float) -> np.ndarray:
    """Mixture B, dB/dT, d2B/dT2 (m^3/mol, per K, per K^2)."""
    props = [_SPECIES[n] for n in names]
    tc = np.array([p[1] for p in props])
    pc = np.array([p[2] for p in props])
    w = np.array([p[3] for p in props])
    vc = 1.0 / np.array([p[4] for p in props])
    zc = pc * vc / (R_J_MOL_K * tc)
    result = np.zeros(3)
    for i in range(len(names)):
        for j in range(len(names)):
            tcij = np.sqrt(tc[i] * tc[j]) * (1.0 - _binary_k(names[i], names[j]))
            vcij = ((vc[i] ** (1 / 3) + vc[j] ** (1 / 3)) / 2.0) ** 3
            zcij = (zc[i] + zc[j]) / 2.0
            pcij = zcij * R_J_MOL_K * tcij / vcij
            wij = (w[i] + w[j]) / 2.0
            f0, f1 = _tsonopoulos(temperature_k / tcij)
            scale = R_J_MOL_K * tcij / pcij * (f0 + wij * f1)
            result += x[i] * x[j] * scale * np.array([1.0, 1.0 / tcij, 1.0 / tcij ** 2])
    return result


def gas_state(fuel: str, air_fraction: float, temperature_k: float,
              pressure_pa: float = STANDARD_AMBIENT_PA) -> GasState:
    """Real-gas properties of the tube gas.

    Parameters
    ----------
    fuel : str
        ``"propane"``, ``"butane"`` (n-butane), ``"isobutane"``, ``"methane"``,
        ``"natural-gas"`` or ``"air"``.
    air_fraction : float
        Mole fraction of air mixed into the fuel (0 to 1).
    temperature_k : float
        Gas temperature, K.
    pressure_pa : float
        Absolute pressure, Pa (ambient plus the small static overpressure).

    Returns
    -------
    GasState
        Sound speed ``w^2 = (1/M) [(dp/drho)_T + T (dp/dT)_rho^2 / (rho^2 c_v)]``
        from the virial equation of state (see module docstring).
    """
    comp = mixture(fuel, air_fraction)
    names = list(comp)
    x = np.array([comp[n] for n in names])
    x = x / x.sum()
    props = [_SPECIES[n] for n in names]
    molar_mass = float(np.dot(x, [p[0] for p in props]))
    t = float(temperature_k)
    u = (t - 300.0) / 100.0
    cp0 = R_J_MOL_K * float(sum(xi * (c[0] + c[1] * u + c[2] * u * u)
                                for xi, c in zip(x, (p[5] for p in props))))
    cv0 = cp0 - R_J_MOL_K
    b, db, d2b = _second_virial(names, x, t)

    # molar density from p = rho R T (1 + B rho): the physical root of the quadratic
    rt = R_J_MOL_K * t
    disc = 1.0 + 4.0 * b * pressure_pa / rt
    rho_mol = (-1.0 + np.sqrt(disc)) / (2.0 * b) if b != 0.0 else pressure_pa / rt
    dp_drho_t = rt * (1.0 + 2.0 * b * rho_mol)
    dp_dt_rho = rho_mol * R_J_MOL_K * (1.0 + (b + t * db) * rho_mol)
    cv = cv0 - rt * (2.0 * db + t * d2b) * rho_mol
    w2 = (dp_drho_t + t * dp_dt_rho ** 2 / (rho_mol ** 2 * cv)) / molar_mass
    cp = cv + t * dp_dt_rho ** 2 / (rho_mol ** 2 * dp_drho_t)
    z = 1.0 + b * rho_mol

    # transport: Wilke (viscosity) and Mason-Saxena (conductivity) mixing
    mu_i = np.array([p[6] * (t / 293.15) ** p[7] for p in props])
    k_i = np.array([p[8] * (t / 293.15) ** p[9] for p in props])
    m_i = np.array([p[0] for p in props])
    phi = (1.0 + np.sqrt(mu_i[:, None] / mu_i[None, :]) * (m_i[None, :] / m_i[:, None]) ** 0.25) ** 2
    phi /= np.sqrt(8.0 * (1.0 + m_i[:, None] / m_i[None, :]))
    denom = phi @ x
    mu = float(np.sum(x * mu_i / denom))
    k = float(np.sum(x * k_i / denom))
    cp_mass = cp / molar_mass
    return GasState(
        sound_speed_m_s=float(np.sqrt(w2)),
        density_kg_m3=float(rho_mol * molar_mass),
        gamma=float(cp / cv),
        viscosity_pa_s=mu,
        prandtl=float(mu * cp_mass / k),
        molar_mass_kg_mol=molar_mass,
        temperature_k=t,
        pressure_pa=float(pressure_pa),
        compressibility=float(z),
    )
