"""The family of tubes a ceiling must be safe for, and a calibration point it cannot mislead.

The model's losses are uncertain: with still gas the holes are pure masses and
the modes ring with Q in the hundreds; with the gas flowing out of the holes
(:mod:`showkit.physics.biasflow`) they are resistive and the low modes ring
with Q of a few.  A real lit tube lies somewhere in between.  A *loss family*
is a set of straight paths (*branches*) in the plane (mean jet velocity
``U``, extra hole resistance ``R``); each point of a branch is one tube model.

- Before a measurement the branches run from the model's minimum (``U = 0``,
  ``R = 0``: walls, radiation and inertive holes) to
  (a) the bias-flow model at the jet velocity of twice the rig's static
  pressure (so that any manometer reading up to twice the rig file's is
  inside), and (b) the quasi-steady outflow resistance at that pressure
  (linearised orifice law, still gas: the same losses without the mode
  shifts).
- Losses of another kind -- e.g. spread along the bore by the flames or a
  leaky membrane -- are outside the family.  Adding a uniform loss down to
  Q 10 at every mode was tried: it changes the cap pressure by 1.9 dB or more
  at every frequency from 20 Hz to the plane-wave limit of the demo rig, so no
  calibration point could be accepted.  Outside the family the guarantee
  does not hold: a still-gas tube with a uniform bore loss ringing with Q 21
  to 26, calibrated at the demo rig's 1439.3 Hz, gets ceilings up to 5.8 dB
  too high between modes (tests/family_support.py re-simulation).  A
  measurement narrows the family to what the tube does (its fit).
- After a measurement, one branch spans the fitted values minus to plus twice
  their standard error (flow extended by sqrt 2 either way for a static
  pressure from half to twice the rig's).

Every member is calibrated with the *same* calibration reading.  The ceiling
locked for a cue is the lowest over a small set of members (:func:`members`)
chosen so that the steady-state pressure at every hole per unit drive, over
all frequencies, of every point of the family is within
:data:`MEMBER_TOLERANCE_DB` of the largest over the set.  Candidates are
placed along each branch on a grid that is geometric in the distance from the
still-gas end (the losses add to the tube's own, which are a hundred times
smaller than the branch's far end: the first percent of a branch moves and
lowers each mode's peak as much as the rest), refined by bisection until every
midpoint is covered by its neighbours; then the fewest candidates that cover
all of them within half the tolerance are kept (greedy set cover: each step
adds the candidate that most lowers the worst excess).  A bisection from the
ends alone missed, on a test rig, a member 1/64 of the way along that stood
0.23 dB above every chosen one (a ceiling 0.24 dB high when checked in time).
A far denser set is checked in ``tests/test_family.py``.

The calibration point: the pressure at the cap per unit drive at the
reference frequency must not depend on the losses, or a reading taken there
scales every ceiling by the wrong model's Q (near a resonance it scales with
Q).  :func:`reference_spread_db` is its change over the family; a reference
with a spread above :data:`REFERENCE_LIMIT_DB` is refused
(:func:`check_reference`) and :func:`suggest_reference` finds one that will do.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import lru_cache

import numpy as np

from showkit.physics.tube import TubeModel

#: Largest change of the cap pressure at the reference over the family, dB.
REFERENCE_LIMIT_DB = 0.1
#: The members' steady-state envelope reaches the family's within this, dB.
MEMBER_TOLERANCE_DB = 0.025
#: Before a measurement the family covers static pressures up to this multiple of the rig's.
STATIC_SPAN = 2.0
#: Points per branch for the reference spread (the spread is smooth along a branch).
SPREAD_POINTS = 129
#: Frequency grid of the member search: points from 5 Hz to the plane-wave limit.
MEMBER_GRID_POINTS = 4000
#: Smallest bisection step along a branch, relative to the distance from its start.
MIN_STEP = 1.0 / 256
#: The candidate grid starts at 2**-GEOMETRIC_DEPTH of a branch and doubles to its end.
GEOMETRIC_DEPTH = 6


@dataclass(frozen=True)
class LossPoint:
    """One tube's losses: mean jet velocity (bias flow) and extra hole resistance."""

    flow_m_s: float
    resistance_pa_s_m3: float

    def mix(self, other: LossPoint, t: float) -> LossPoint:
        return LossPoint(self.flow_m_s + t * (other.flow_m_s - self.flow_m_s),
                         self.resistance_pa_s_m3 + t * (other.resistance_pa_s_m3 - self.resistance_pa_s_m3))


@dataclass(frozen=True)
class LossFamily:
    """Branches of tube models between loss points, and the best estimate.

    Attributes
    ----------
    base : TubeModel
        The tube (geometry and gas); its holes' flow and resistance are replaced.
    branches : tuple of (LossPoint, LossPoint)
    best : LossPoint
        The best estimate (modes, Q, flames and scores use it).
    measured : bool
        Whether the branches come from a measurement's fit.
    """

    base: TubeModel
    branches: tuple
    best: LossPoint
    measured: bool = False

    def __hash__(self):
        return hash((self.base.geometry, self.base.gas, self.branches, self.best, self.measured))

    def __eq__(self, other):
        return (isinstance(other, LossFamily) and self.base.geometry == other.base.geometry
                and self.base.gas == other.base.gas and self.branches == other.branches
                and self.best == other.best and self.measured == other.measured)

    def model(self, point: LossPoint) -> TubeModel:
        geo = replace(self.base.geometry, hole_flow_m_s=float(point.flow_m_s),
                      hole_resistance_pa_s_m3=float(point.resistance_pa_s_m3))
        return TubeModel(geo, self.base.gas)

    @property
    def best_model(self) -> TubeModel:
        return self.model(self.best)

    def dense(self, per_branch: int) -> list[LossPoint]:
        """``per_branch`` evenly spaced points along every branch (ends included)."""
        t = np.linspace(0.0, 1.0, per_branch)
        pts = []
        for a, b in self.branches:
            pts += [a.mix(b, float(x)) for x in t]
        return list(dict.fromkeys(pts))

    def describe_best(self) -> str:
        """The best estimate in a few words."""
        b = self.best
        if self.base.geometry.hole_count == 0:
            return "walls and radiation"
        if b.flow_m_s > 0:
            kind = f"gas flowing out of the holes at {b.flow_m_s:.2f} m/s (Howe's bias-flow hole)"
        else:
            kind = "still gas, inertive holes"
        if b.resistance_pa_s_m3 > 0:
            kind += f", hole resistance {b.resistance_pa_s_m3:.3g} Pa s/m3"
        return kind + (", measured" if self.measured else "")

    def describe(self) -> str:
        """The family in a few words."""
        if self.base.geometry.hole_count == 0:
            return "walls and radiation only (no holes)"
        if self.measured:
            (a, b), = self.branches
            return (f"the measured fit and its uncertainty (jet {a.flow_m_s:.2f} to {b.flow_m_s:.2f} m/s, "
                    f"resistance {a.resistance_pa_s_m3:.3g} to {b.resistance_pa_s_m3:.3g} Pa s/m3)")
        top = max(b.flow_m_s for _, b in self.branches)
        return (f"still gas (inertive holes) to gas flowing out at up to {top:.2f} m/s "
                "(bias-flow and quasi-steady hole models)")


def _hole_impedances(family: LossFamily, omega: np.ndarray, points: list[LossPoint]) -> np.ndarray:
    """Hole impedance of each point at each angular frequency: (points, F).

    The still hole's impedance is computed once; each point swaps its mass of
    end corrections for the bias-flow aperture and adds its resistance.
    """
    from showkit.physics.biasflow import hole_aperture_impedance

    geo, gas = family.base.geometry, family.base.gas
    still = family.model(LossPoint(0.0, 0.0)).hole_impedance(omega)
    mass = hole_aperture_impedance(omega, gas.density_kg_m3, geo.hole_radius_m, geo.end_correction_m, 0.0)
    out = np.empty((len(points), omega.size), dtype=complex)
    for k, p in enumerate(points):
        aperture = (mass if p.flow_m_s <= 0 else
                    hole_aperture_impedance(omega, gas.density_kg_m3, geo.hole_radius_m,
                                            geo.end_correction_m, p.flow_m_s))
        out[k] = still - mass + aperture + p.resistance_pa_s_m3
    return out


def cap_pressure(family: LossFamily, freq_hz: float, points: list[LossPoint]) -> np.ndarray:
    """``|H_cap|`` at one frequency for each point, in one pass of the transfer matrices."""
    base = family.base
    if base.geometry.hole_count == 0 or not points:
        return np.full(max(len(points), 1), abs(base.response([freq_hz]).cap_pressure[0]))
    omega = 2.0 * np.pi * float(freq_hz)
    z = _hole_impedances(family, np.array([omega]), points)[:, 0]
    freq = np.full(len(points), float(freq_hz))
    return np.abs(base.response(freq, hole_impedance=z).cap_pressure)


def reference_spread_db(family: LossFamily, reference_hz: float, points: int = SPREAD_POINTS) -> float:
    """How much the cap pressure per unit drive at the reference changes over the family, dB.

    The drive model is the same for every member and cancels; what is left is
    ``max - min`` of ``20 log10 |H_cap(f_ref)|`` over ``points`` points per branch.
    """
    caps = cap_pressure(family, reference_hz, family.dense(points))
    level = 20.0 * np.log10(caps)
    return float(level.max() - level.min())


def spread_curve_db(family: LossFamily, freq_hz: np.ndarray, points: int = 17) -> np.ndarray:
    """:func:`reference_spread_db` on a grid of frequencies (coarser along the branches)."""
    f = np.asarray(freq_hz, dtype=float)
    pts = family.dense(points)
    if family.base.geometry.hole_count == 0:
        return np.zeros(f.size)
    omega = 2.0 * np.pi * f
    z = _hole_impedances(family, omega, pts)                       # (P, F)
    freq = np.broadcast_to(f[None, :], z.shape).ravel()
    z = z.ravel()
    caps = np.empty(z.size)
    step = 8192  # evaluations per pass: bounded memory (the pass keeps every hole's pressure)
    for k in range(0, z.size, step):
        caps[k:k + step] = np.abs(family.base.response(freq[k:k + step],
                                                       hole_impedance=z[k:k + step]).cap_pressure)
    level = 20.0 * np.log10(caps.reshape(len(pts), f.size))
    return level.max(axis=0) - level.min(axis=0)


@dataclass(frozen=True)
class ReferenceCheck:
    """What :func:`check_reference` found.

    Attributes
    ----------
    reference_hz : float
    spread_db : float
        Change of the cap pressure at the reference over the family, dB.
    ok : bool
        ``spread_db <= REFERENCE_LIMIT_DB``.
    mode_n : int or None
        The nearest mode of the best estimate (the modes ``showkit modes`` lists), and
    mode_hz : float or None
        its frequency, Hz (only when refused).
    suggestion_hz : float or None
        A frequency that would do (only when refused).
    """

    reference_hz: float
    spread_db: float
    ok: bool
    mode_n: int | None = None
    mode_hz: float | None = None
    suggestion_hz: float | None = None

    def message(self) -> str:
        """One line saying why the reference is refused (empty when it is accepted)."""
        if self.ok:
            return ""
        near = (f"near mode {self.mode_n} ({self.mode_hz:.1f} Hz)" if self.mode_n is not None
                else "near a resonance")
        return (f"the calibration frequency {self.reference_hz:g} Hz lies {near}: the cap pressure there "
                f"changes by {_over_limit_text(self.spread_db, REFERENCE_LIMIT_DB)} dB with the tube's losses "
                f"(limit {REFERENCE_LIMIT_DB:g} dB), "
                "so a reading there could set every ceiling too high")


#: Suggested calibration frequencies stay below this fraction of the plane-wave limit (the drive
#: model is trusted less near the top of the band: this project's choice, no source).
SUGGEST_TOP_OF_LIMIT = 0.8


def _over_limit_text(value: float, limit: float) -> str:
    """``value`` (above ``limit``) with two decimals, or as many more as it takes not to read as the limit."""
    for decimals in range(2, 7):
        text = f"{value:.{decimals}f}"
        if float(text) != limit:
            return text
    return f"{value:.6f}"


def suggest_reference(family: LossFamily, near_hz: float | None = None,
                      max_hz: float = float("inf")) -> float | None:
    """A reference frequency whose spread is within the limit, Hz (None if there is none).

    Candidates are the middles of the frequency windows where the spread stays
    below half the limit, from 5 Hz up to 0.8 times the plane-wave limit (the
    drive model is trusted less near the top of the band).  With ``near_hz``
    the candidate nearest it (in cents) is returned; without, the middle of the
    widest window (in cents): it has the most room for a mode that is not
    quite where the model puts it.  ``max_hz``: the highest calibration frequency accepted
    (the calibration door's limit, :data:`showkit.conditions.REFERENCE_FREQUENCY_MAX_HZ`).
    """
    top = min(SUGGEST_TOP_OF_LIMIT * family.base.plane_wave_limit_hz, max_hz)
    f = np.exp(np.linspace(np.log(20.0), np.log(top), 2000))
    good = spread_curve_db(family, f) <= REFERENCE_LIMIT_DB / 2.0
    if not good.any():
        return None
    edges = np.flatnonzero(np.diff(np.concatenate([[0], good.astype(int), [0]])))
    starts, ends = edges[::2], edges[1::2] - 1
    middles = np.sqrt(f[starts] * f[ends])
    widths = np.log(f[ends] / f[starts])
    order = np.argsort(-widths) if near_hz is None else np.argsort(np.abs(np.log(middles / near_hz)))
    for k in order:
        cand = float(round(middles[k], 1))
        if reference_spread_db(family, cand) <= REFERENCE_LIMIT_DB / 2.0:
            return cand
    return None


@lru_cache(maxsize=64)
def check_reference(family: LossFamily, reference_hz: float, max_hz: float = float("inf")) -> ReferenceCheck:
    """Accept or refuse a calibration frequency for this family (see the module notes); a refusal
    suggests one at or below ``max_hz`` (:func:`suggest_reference`).

    Kept per family and frequency: every rig load checks its calibration point.
    """
    spread = reference_spread_db(family, reference_hz)
    if spread <= REFERENCE_LIMIT_DB:
        return ReferenceCheck(float(reference_hz), spread, True)
    from showkit.physics.modes import find_modes

    # the best estimate's modes, as listed everywhere else: the still-gas member's (the sharpest) are
    # numbered and placed otherwise (its mode 3 at 171.9 Hz where the listed mode 3 is at 156.3 Hz)
    best = family.best_model
    modes = find_modes(best, min(best.plane_wave_limit_hz, 2.0 * reference_hz + 50.0))
    mode_n = mode_hz = None
    if modes:
        m = min(modes, key=lambda m: abs(np.log(m.frequency_hz / reference_hz)))
        mode_n, mode_hz = m.n, m.frequency_hz
    return ReferenceCheck(float(reference_hz), spread, False, mode_n, mode_hz,
                          suggest_reference(family, reference_hz, max_hz))


def _envelope(family: LossFamily, point: LossPoint, reference_hz: float, freq_hz: np.ndarray,
              calibration_gas=None) -> np.ndarray:
    """Largest ``|H_i(f)|`` over the holes, calibrated at the reference (the drive cancels).

    ``calibration_gas``: the gas the calibration was read in, when not the family's (another
    day's temperature): the member's cap response at the reference is taken in it, as the
    drive scale is (:func:`showkit.physics.response.transfer`).
    """
    model = family.model(point)
    r = model.response(np.concatenate([[reference_hz], freq_hz]))
    cap = r.cap_pressure[0]
    if calibration_gas is not None and calibration_gas != family.base.gas:
        cap = TubeModel(model.geometry, calibration_gas).response([reference_hz]).cap_pressure[0]
    return np.abs(r.hole_pressure[:, 1:]).max(axis=0) / np.abs(cap)


def _branch_candidates(a: LossPoint, b: LossPoint, envelope, limit: float) -> dict:
    """``{t: envelope}`` along the branch ``a``-``b``: a grid geometric in ``t`` (0, 2**-depth, ...,
    1/2, 1), each interval bisected (geometric midpoint away from 0) until its midpoint's envelope is
    within ``limit`` (a ratio) of the larger of its neighbours' or the step is :data:`MIN_STEP` of
    ``t`` (of 2**-depth next to 0)."""
    ts = [0.0] + [2.0 ** -k for k in range(GEOMETRIC_DEPTH, -1, -1)]
    env = {t: envelope(a.mix(b, t)) for t in ts}
    while True:
        added = []
        for lo, hi in zip(ts[:-1], ts[1:]):
            if hi - lo <= MIN_STEP * max(hi, 2.0 ** -GEOMETRIC_DEPTH):  # next to 0 too: it ends
                continue
            mid = 0.5 * hi if lo == 0.0 else float(np.sqrt(lo * hi))
            env[mid] = envelope(a.mix(b, mid))
            if np.max(env[mid] / np.maximum(env[lo], env[hi])) > limit:
                added.append(mid)
        if not added:
            return {t: env[t] for t in ts}
        ts = sorted(ts + added)


def _cover(envelopes: np.ndarray, first: int, limit: float) -> list[int]:
    """Rows of ``envelopes`` (candidates x frequencies) whose largest is within ``limit`` (a ratio)
    of every row, starting from row ``first``: greedy, in the manner of the set-cover heuristic
    (Chvátal, Math. Oper. Res. 4(3), 1979), each step adding the row that most lowers the worst
    excess (every row is a candidate once, so it ends)."""
    keep = [first]
    top = envelopes[first].copy()
    while np.max(envelopes / top) > limit:
        worst = np.array([np.max(envelopes / np.maximum(top, row)) for row in envelopes])
        worst[keep] = np.inf
        j = int(np.argmin(worst))
        keep.append(j)
        top = np.maximum(top, envelopes[j])
    return keep


@lru_cache(maxsize=16)
def members(family: LossFamily, reference_hz: float,
            tolerance_db: float = MEMBER_TOLERANCE_DB, calibration_gas=None) -> tuple[LossPoint, ...]:
    """The members a robust ceiling takes the lowest over.

    Candidates along each branch (:func:`_branch_candidates`) until the calibrated
    steady-state envelope (largest pressure at any hole per unit drive, every
    frequency from 5 Hz to the plane-wave limit) of every midpoint is within
    ``tolerance_db`` of the larger of its two neighbours'; of them, the fewest
    whose largest envelope is within half ``tolerance_db`` of every candidate's
    (:func:`_cover`).  The best estimate is always a member, listed first.
    ``calibration_gas``: the gas of the calibration reading when the family is
    built for another (:func:`_envelope`).
    """
    if family.base.geometry.hole_count == 0:
        return (family.best,)
    f = np.exp(np.linspace(np.log(5.0), np.log(family.base.plane_wave_limit_hz), MEMBER_GRID_POINTS))
    limit = 10.0 ** (tolerance_db / 20.0)

    def envelope(point):
        return _envelope(family, point, reference_hz, f, calibration_gas)

    candidates = {family.best: envelope(family.best)}
    for a, b in family.branches:
        for t, env in _branch_candidates(a, b, envelope, limit).items():
            candidates.setdefault(a.mix(b, t), env)
    points = list(candidates)
    keep = _cover(np.array([candidates[p] for p in points]), 0, 10.0 ** (tolerance_db / 40.0))
    return tuple(points[k] for k in sorted(keep))
