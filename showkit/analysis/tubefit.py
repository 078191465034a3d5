"""Fit the tube model to measured modes: sound speed, hole end correction, hole resistance.

Method
------
Non-linear least squares (scipy.optimize.least_squares, trust-region
reflective with bounds) over three parameters of the transfer-matrix model
(:mod:`showkit.physics.tube`):

- ``speed_scale``: the gas's sound speed relative to the rig's (gas purity
  and temperature both move it; the rig file takes it back as an air
  fraction or an effective temperature, see :mod:`showkit.rigwrite`);
- ``end_correction``: the hole's total end correction in hole radii;
- the holes' losses, by one of two hole models:
  ``"still"`` -- inertive holes in still gas with an extra acoustic resistance
  per hole (``resistance``, Pa s/m^3); or ``"flowing"`` -- the bias-flow hole
  (Howe 1979, :mod:`showkit.physics.biasflow`) with the jet velocity a free
  multiple ``flow`` of the orifice law's at the rig's static pressure.

With measured Q both models are fitted and the one with the smaller sum of
squared residuals is chosen (they have the same number of parameters), so the
measurement tells the models apart: still holes keep the low modes pushed up
by the hole mass (Gardner, Gee & Dix, JASA 125, 2009), flowing holes lose that
mass and damp the low modes hardest.  The chosen loss parameter's standard
error comes from the Jacobian at the solution (``(J^T J)^-1``, scaled up by
the reduced chi-square when it exceeds 1); the rig's loss family after a
measurement spans it plus and minus two standard errors
(:mod:`showkit.physics.family`).

Residuals are the mode frequency errors in cents over ``cents_sigma`` and
the log Q errors over ``q_sigma`` (Q only informs the resistance).  The
model's modes are the peaks of ``|Z_in|`` tracked near each measured mode
(a grid search then Newton steps on ``log |Z_in|^2``, so they move smoothly
with the parameters), with Q from the peak curvature of a Lorentzian.

A parameter the data cannot determine -- its whole plausible range moves
the residuals by less than one standard error, e.g. the end correction of a
plain pipe or of modes far above the breathing mode -- is held at the rig's
value and reported (``undetermined``), as is a badly conditioned Jacobian.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from showkit.physics.modes import find_modes
from showkit.physics.pitch import cents
from showkit.physics.tube import TubeModel

#: Plausible span of each parameter (for the determinability test).
SPANS = {"speed_scale": 0.05, "end_correction": 1.0, "resistance": 1.0}


@dataclass
class TubeFit:
    """Result of :func:`fit_tube`.

    Attributes
    ----------
    sound_speed_m_s : float
        Fitted effective sound speed, m/s.
    speed_scale : float
        Its ratio to the rig's sound speed.
    end_correction : float or None
        Fitted total end correction, hole radii (None: no holes).
    resistance_pa_s_m3 : float
        Fitted extra resistance per hole, Pa s/m^3.
    hole_model : str
        ``"still"`` or ``"flowing"`` (see the module notes).
    flow_scale : float
        Jet velocity relative to the orifice law (0 for still holes).
    flow_range, resistance_range : tuple of float or None
        The loss parameter's fitted value minus and plus two standard errors
        (None when it was not determined).
    model_costs : dict
        Sum of squared (weighted) residuals of each hole model fitted.
    measured_hz, measured_q : list of float
        The measured modes used.
    before_hz, after_hz, after_q : list of float
        The rig's model before the fit and the fitted model, per mode.
    residual_cents : list of float
        Fitted model minus measured, cents, per mode.
    before_cents : list of float
        Rig model minus measured, cents, per mode.
    undetermined : list of str
        Parameters the data cannot determine (held at the rig's value).
    condition : float
        Condition number of the scaled Jacobian.
    warnings : list of str
    """

    sound_speed_m_s: float
    speed_scale: float
    end_correction: float | None
    resistance_pa_s_m3: float
    measured_hz: list
    measured_q: list
    before_hz: list
    after_hz: list
    after_q: list
    residual_cents: list
    before_cents: list
    undetermined: list = field(default_factory=list)
    condition: float = 1.0
    warnings: list = field(default_factory=list)
    hole_model: str = "still"
    flow_scale: float = 0.0
    flow_range: tuple | None = None
    resistance_range: tuple | None = None
    model_costs: dict = field(default_factory=dict)
    cost: float = 0.0

    @property
    def rms_cents(self) -> float:
        return float(np.sqrt(np.mean(np.square(self.residual_cents)))) if self.residual_cents else 0.0


def variant(model: TubeModel, speed_scale: float = 1.0, end_correction: float | None = None,
            resistance_pa_s_m3: float | None = None, flow_m_s: float | None = None) -> TubeModel:
    """The model with the gas's sound speed scaled and the hole parameters replaced.

    Parameters
    ----------
    model : TubeModel
    speed_scale : float
        Factor on the sound speed.
    end_correction : float, optional
        Total end correction, hole radii.
    resistance_pa_s_m3 : float, optional
        Extra resistance per hole, Pa s/m^3.
    flow_m_s : float, optional
        Mean jet velocity out of the holes (bias flow), m/s; 0 for still gas.
    """
    gas = replace(model.gas, sound_speed_m_s=model.gas.sound_speed_m_s * speed_scale)
    geo = model.geometry
    if end_correction is not None:
        geo = replace(geo, end_correction=float(end_correction))
    if resistance_pa_s_m3 is not None:
        geo = replace(geo, hole_resistance_pa_s_m3=float(resistance_pa_s_m3))
    if flow_m_s is not None:
        geo = replace(geo, hole_flow_m_s=float(flow_m_s))
    return TubeModel(geo, gas)


def _log_power(model: TubeModel, freq_hz: np.ndarray) -> np.ndarray:
    flat = np.asarray(freq_hz, dtype=float)
    z = model.response(flat.ravel()).input_impedance
    return np.log(np.abs(z) ** 2).reshape(flat.shape)


def track_modes(model: TubeModel, guess_hz: np.ndarray, span: float = 0.03) -> tuple[np.ndarray, np.ndarray]:
    """Peaks of ``|Z_in|`` near each guess, and their Q, refined smoothly.

    Parameters
    ----------
    model : TubeModel
    guess_hz : ndarray
        Where to look, Hz.
    span : float
        Relative half-width of the search around each guess.
    """
    g = np.asarray(guess_hz, dtype=float)
    grid = g[:, None] * (1.0 + np.linspace(-span, span, 121))[None, :]
    lp = _log_power(model, grid)
    f = grid[np.arange(g.size), np.argmax(lp, axis=1)]
    d = 1e-5
    for _ in range(4):  # Newton on d/df log|Z|^2
        three = _log_power(model, f[:, None] * np.array([1 - d, 1.0, 1 + d])[None, :])
        g1 = (three[:, 2] - three[:, 0]) / (2 * d)
        g2 = (three[:, 2] + three[:, 0] - 2 * three[:, 1]) / d ** 2
        step = np.where(g2 < 0, -g1 / g2, 0.0)
        f = f * (1.0 + np.clip(step, -span / 4, span / 4))
    three = _log_power(model, f[:, None] * np.array([1 - 1e-4, 1.0, 1 + 1e-4])[None, :])
    curv = (three[:, 2] + three[:, 0] - 2 * three[:, 1]) / 1e-8
    # log Lorentzian: d2/du2 log(1/(1 + 4 Q^2 u^2)) = -8 Q^2 at u = 0 (u = relative detuning)
    q = np.sqrt(np.clip(-curv / 8.0, 0.25, 1e10))
    return f, q


def match_modes(model: TubeModel, measured_hz: np.ndarray) -> tuple[np.ndarray, float, list]:
    """Model mode nearest each measured one (after a common scale), the scale, warnings."""
    f_top = float(np.max(measured_hz)) * 1.3
    modes = np.array([m.frequency_hz for m in find_modes(model, f_top)])
    if modes.size == 0:
        return np.full(len(measured_hz), np.nan), 1.0, ["the model has no modes in the measured range"]
    def nearest(scale):
        idx = np.argmin(np.abs(np.log(modes[None, :] * scale / measured_hz[:, None])), axis=1)
        return idx
    idx = nearest(1.0)
    scale = float(np.median(measured_hz / modes[idx]))
    idx = nearest(scale)
    warnings = []
    guesses = modes[idx] * 1.0
    if np.unique(idx).size < idx.size:
        warnings.append("two measured peaks match one model mode: the model is far off, or a peak is spurious")
    return guesses, scale, warnings


def fit_tube(model: TubeModel, measured_hz, measured_q=None, cents_sigma: float = 2.0,
             q_sigma: float = 0.15, fit_end_correction: bool = True,
             fit_resistance: bool = True, progress=None, jet_m_s: float = 0.0,
             hole_model: str | None = None) -> TubeFit:
    """Fit sound speed, end correction and the holes' losses to measured modes.

    With holes, measured Q and ``jet_m_s > 0`` both hole models are fitted and
    the better one is returned (``hole_model`` forces one); otherwise the still
    model with its resistance, as before.  ``jet_m_s`` is the orifice law's jet
    velocity at the rig's static pressure, m/s.  Other parameters as
    :func:`fit_one`.
    """
    report = progress or (lambda fraction, text: None)
    has_q = measured_q is not None and np.all(np.isfinite(np.asarray(measured_q, dtype=float)))
    candidates = ["still"]
    if model.geometry.hole_count and has_q and jet_m_s > 0 and fit_resistance:
        candidates = ["still", "flowing"] if hole_model is None else [hole_model]
    elif hole_model is not None:
        candidates = [hole_model]
    fits = {}
    for k, name in enumerate(candidates):
        def part(fraction, text, k=k, name=name):
            report((k + fraction) / len(candidates), f"{text} ({name} holes)")
        fits[name] = fit_one(model, measured_hz, measured_q, cents_sigma, q_sigma, fit_end_correction,
                             fit_resistance, part, loss=name, jet_m_s=jet_m_s)
    best = min(fits.values(), key=lambda f: f.cost)
    best.model_costs = {name: f.cost for name, f in fits.items()}
    if len(fits) > 1:
        other = [f for f in fits.values() if f is not best][0]
        best.warnings.append(f"hole model: {best.hole_model} holes fit the modes better than "
                             f"{other.hole_model} holes (sum of squared residuals {best.cost:.3g} "
                             f"against {other.cost:.3g})")
    return best


def fit_one(model: TubeModel, measured_hz, measured_q=None, cents_sigma: float = 2.0,
            q_sigma: float = 0.15, fit_end_correction: bool = True,
            fit_resistance: bool = True, progress=None, loss: str = "still",
            jet_m_s: float = 0.0) -> TubeFit:
    """Fit sound speed, end correction and one hole model's loss parameter to measured modes.

    Parameters
    ----------
    model : TubeModel
        The rig's model (starting point).
    measured_hz : array_like
        Measured mode frequencies, Hz.
    measured_q : array_like, optional
        Their Q (used for the resistance).
    cents_sigma : float
        Standard error of a measured mode frequency, cents.
    q_sigma : float
        Standard error of ``ln Q``.
    fit_end_correction, fit_resistance : bool
        Whether to try fitting these (they are held when the rig has no holes);
        ``fit_resistance`` stands for the loss parameter of either hole model.
    progress : callable(fraction, text), optional
    loss : str
        ``"still"`` (loss parameter: the extra resistance) or ``"flowing"`` (the
        jet velocity as a multiple of ``jet_m_s``; no extra resistance).
    jet_m_s : float
        The orifice law's jet velocity at the rig's static pressure, m/s.
    """
    report = progress or (lambda fraction, text: None)
    flowing = loss == "flowing"
    if model.geometry.hole_count:
        model = variant(model, resistance_pa_s_m3=0.0 if flowing else None,
                        flow_m_s=None if flowing else 0.0)
    f_meas = np.asarray(measured_hz, dtype=float)
    q_meas = None if measured_q is None else np.asarray(measured_q, dtype=float)
    report(0.05, "matching measured and modelled modes")
    guesses, scale0, warnings = match_modes(model, f_meas)
    before_f, _ = track_modes(model, guesses)
    problem = _FitProblem.of(model, f_meas, q_meas, guesses, scale0, flowing, jet_m_s, cents_sigma, q_sigma)
    use_q = q_meas is not None and np.all(np.isfinite(q_meas))
    names, undetermined = _free_parameters(problem.has_holes, fit_end_correction, fit_resistance, use_q)
    sol, jac, active = _solve(problem, names, undetermined, report)
    sv = np.linalg.svd(jac, compute_uv=False) if jac.size else np.array([1.0])
    condition = float(sv[0] / sv[-1]) if sv[-1] > 0 else float("inf")
    vals = problem.unpack(sol.x, active)
    f_after, q_after = track_modes(problem.build(vals), guesses * vals["speed_scale"])
    resid = cents(f_after, f_meas)
    warnings += _fit_warnings(undetermined, condition, resid)
    report(1.0, "fit done")
    loss_range = _loss_range(sol, active, vals, problem.r_scale) if problem.has_holes else None
    has_holes, r_scale = problem.has_holes, problem.r_scale
    loss_value = float(vals["resistance"]) if has_holes else 0.0
    return TubeFit(
        sound_speed_m_s=float(model.gas.sound_speed_m_s * vals["speed_scale"]),
        speed_scale=float(vals["speed_scale"]),
        end_correction=None if not has_holes else float(vals["end_correction"]),
        resistance_pa_s_m3=0.0 if (flowing or not has_holes) else loss_value * r_scale,
        hole_model="flowing" if flowing else "still",
        flow_scale=loss_value if flowing else 0.0,
        flow_range=(loss_range if flowing else (0.0, 0.0)) if loss_range else None,
        resistance_range=((0.0, 0.0) if flowing else loss_range) if loss_range else None,
        cost=float(np.sum(sol.fun ** 2)),
        measured_hz=f_meas.tolist(), measured_q=[] if q_meas is None else q_meas.tolist(),
        before_hz=before_f.tolist(), after_hz=f_after.tolist(), after_q=q_after.tolist(),
        residual_cents=resid.tolist(), before_cents=cents(before_f, f_meas).tolist(),
        undetermined=sorted(set(undetermined)), condition=condition, warnings=warnings)


#: the bounds and finite-difference steps of the fitted parameters (resistance: in units of
#: rho c / hole area for the still holes; the jet velocity over the orifice law's when flowing)
LOWER = {"speed_scale": 0.7, "end_correction": 0.0, "resistance": 0.0}
UPPER = {"speed_scale": 1.4, "end_correction": 5.0}
STEP = {"speed_scale": 1e-4, "end_correction": 1e-3, "resistance": 1e-3}


@dataclass
class _FitProblem:
    """One hole model's least-squares problem: the start values, the model per parameter set, the residuals."""

    model: TubeModel
    f_meas: np.ndarray
    q_meas: np.ndarray | None
    guesses: np.ndarray
    scale0: float
    ec0: float | None
    r0: float
    r_scale: float
    flowing: bool
    jet_m_s: float
    cents_sigma: float
    q_sigma: float

    @property
    def has_holes(self) -> bool:
        return self.model.geometry.hole_count > 0

    @classmethod
    def of(cls, model, f_meas, q_meas, guesses, scale0, flowing, jet_m_s, cents_sigma, q_sigma) -> _FitProblem:
        geo, gas = model.geometry, model.gas
        has_holes = geo.hole_count > 0
        ec0 = geo.end_correction_m / geo.hole_radius_m if has_holes else None
        r_scale = gas.density_kg_m3 * gas.sound_speed_m_s / geo.hole_area_m2 if has_holes else 1.0
        r0 = geo.hole_resistance_pa_s_m3
        if flowing:  # the loss parameter is the jet velocity over the orifice law's
            r_scale = 1.0
            r0 = geo.hole_flow_m_s / jet_m_s if jet_m_s > 0 else 1.0
        return cls(model, f_meas, q_meas, guesses, scale0, ec0, r0, r_scale, flowing, jet_m_s,
                   cents_sigma, q_sigma)

    def unpack(self, p, active) -> dict:
        vals = {"speed_scale": self.scale0, "end_correction": self.ec0, "resistance": self.r0 / self.r_scale}
        vals.update(dict(zip(active, p)))
        return vals

    def build(self, vals) -> TubeModel:
        if self.flowing and self.has_holes:
            return variant(self.model, vals["speed_scale"], vals["end_correction"],
                           flow_m_s=vals["resistance"] * self.jet_m_s)
        return variant(self.model, vals["speed_scale"], vals["end_correction"],
                       vals["resistance"] * self.r_scale if self.has_holes else None)

    def residuals(self, p, active) -> np.ndarray:
        vals = self.unpack(p, active)
        f_mod, q_mod = track_modes(self.build(vals), self.guesses * vals["speed_scale"])
        r = cents(f_mod, self.f_meas) / self.cents_sigma
        if "resistance" in active:
            r = np.concatenate([r, np.log(q_mod / self.q_meas) / self.q_sigma])
        return r


def _free_parameters(has_holes: bool, fit_end_correction: bool, fit_resistance: bool,
                     use_q: bool) -> tuple[list[str], list[str]]:
    """The parameters to fit, and those asked for that the data cannot carry."""
    names, undetermined = ["speed_scale"], []
    if has_holes and fit_end_correction:
        names.append("end_correction")
    elif has_holes or fit_end_correction:
        undetermined.append("end_correction")
    if has_holes and fit_resistance and use_q:
        names.append("resistance")
    elif fit_resistance:
        undetermined.append("resistance")
    return names, undetermined


def _solve(problem: _FitProblem, names: list[str], undetermined: list[str], report):
    """Bounded least squares (trust-region reflective); a parameter the residuals hardly feel is
    dropped (added to ``undetermined``) and the fit run again, three times at most."""
    from scipy.optimize import least_squares

    upper = dict(UPPER, resistance=3.0 if problem.flowing else 1e3)
    active = list(names)
    for attempt in range(3):
        report(0.2 + 0.25 * attempt, "fitting")
        x0 = [problem.unpack([], [])[n] for n in active]
        x0 = [np.clip(v, LOWER[n] + 1e-9, upper[n] - 1e-9) for v, n in zip(x0, active)]
        sol = least_squares(problem.residuals, x0, args=(active,),
                            bounds=([LOWER[n] for n in active], [upper[n] for n in active]),
                            diff_step=[STEP[n] / max(abs(v), 1e-3) for n, v in zip(active, x0)],
                            method="trf", x_scale=[SPANS[n] for n in active], max_nfev=60)
        jac = sol.jac * np.array([SPANS[n] for n in active])[None, :]
        sens = np.linalg.norm(jac, axis=0)
        weak = [n for n, s in zip(active, sens) if s < 1.0 and n != "speed_scale"]
        if not weak:
            break
        for n in weak:
            active.remove(n)
            undetermined.append(n)
    return sol, jac, active


def _fit_warnings(undetermined: list[str], condition: float, resid_cents: np.ndarray) -> list[str]:
    """What the fit could not determine, a bad conditioning, a mode still missed by over 20 cents."""
    warnings = []
    for n in undetermined:
        warnings.append({"end_correction": "the data cannot determine the hole end correction "
                                           "(no holes, or no modes low enough to feel them): kept the rig's value",
                         "resistance": "the data cannot determine the hole resistance (no holes, or "
                                       "no measured Q that depends on it): kept the rig's value"}[n])
    if condition > 1e4:
        warnings.append(f"the fit is badly conditioned (condition number {condition:.0f}): the "
                        "parameters trade off against each other; treat them with care")
    if np.max(np.abs(resid_cents)) > 20:
        warnings.append(f"the fitted model still misses a mode by {np.max(np.abs(resid_cents)):.0f} cents: "
                        "check the rig's geometry (length, holes) or a spurious peak")
    return warnings


def _loss_range(sol, active: list[str], vals: dict, r_scale: float) -> tuple[float, float] | None:
    """The loss parameter +- 2 standard errors (from the Jacobian, scaled by the reduced chi-square),
    in the parameter's own unit; None when it was not fitted."""
    if "resistance" not in active:
        return None
    try:
        cov = np.linalg.inv(sol.jac.T @ sol.jac)
    except np.linalg.LinAlgError:
        return None
    dof = sol.fun.size - len(active)
    chi2 = float(np.sum(sol.fun ** 2) / dof) if dof > 0 else 1.0
    k = active.index("resistance")
    sigma = float(np.sqrt(cov[k][k] * max(1.0, chi2)))
    value = float(vals["resistance"])
    if not np.isfinite(sigma):
        return None
    return max(0.0, value - 2.0 * sigma) * r_scale, (value + 2.0 * sigma) * r_scale
