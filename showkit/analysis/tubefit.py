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
- ``resistance``: the extra acoustic resistance per hole, Pa s/m^3.

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

    @property
    def rms_cents(self) -> float:
        return float(np.sqrt(np.mean(np.square(self.residual_cents)))) if self.residual_cents else 0.0


def variant(model: TubeModel, speed_scale: float = 1.0, end_correction: float | None = None,
            resistance_pa_s_m3: float | None = None) -> TubeModel:
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
    """
    gas = replace(model.gas, sound_speed_m_s=model.gas.sound_speed_m_s * speed_scale)
    geo = model.geometry
    if end_correction is not None:
        geo = replace(geo, end_correction=float(end_correction))
    if resistance_pa_s_m3 is not None:
        geo = replace(geo, hole_resistance_pa_s_m3=float(resistance_pa_s_m3))
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


def _cents(a, b) -> np.ndarray:
    return 1200.0 * np.log2(np.asarray(a) / np.asarray(b))


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
             fit_resistance: bool = True, progress=None) -> TubeFit:
    """Fit sound speed, end correction and hole resistance to measured modes.

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
        Whether to try fitting these (they are held when the rig has no holes).
    progress : callable(fraction, text), optional
    """
    from scipy.optimize import least_squares

    report = progress or (lambda fraction, text: None)
    f_meas = np.asarray(measured_hz, dtype=float)
    q_meas = None if measured_q is None else np.asarray(measured_q, dtype=float)
    geo, gas = model.geometry, model.gas
    has_holes = geo.hole_count > 0
    ec0 = geo.end_correction_m / geo.hole_radius_m if has_holes else None
    r_scale = gas.density_kg_m3 * gas.sound_speed_m_s / geo.hole_area_m2 if has_holes else 1.0
    r0 = geo.hole_resistance_pa_s_m3
    report(0.05, "matching measured and modelled modes")
    guesses, scale0, warnings = match_modes(model, f_meas)
    before_f, before_q = track_modes(model, guesses)
    names = ["speed_scale"]
    undetermined = []
    if has_holes and fit_end_correction:
        names.append("end_correction")
    elif has_holes or fit_end_correction:
        undetermined.append("end_correction")
    use_q = q_meas is not None and np.all(np.isfinite(q_meas))
    if has_holes and fit_resistance and use_q:
        names.append("resistance")
    elif fit_resistance:
        undetermined.append("resistance")

    def unpack(p, active):
        vals = {"speed_scale": scale0, "end_correction": ec0, "resistance": r0 / r_scale}
        vals.update(dict(zip(active, p)))
        return vals

    def build(vals):
        return variant(model, vals["speed_scale"], vals["end_correction"],
                       vals["resistance"] * r_scale if has_holes else None)

    def residuals(p, active):
        vals = unpack(p, active)
        f_mod, q_mod = track_modes(build(vals), guesses * vals["speed_scale"])
        r = _cents(f_mod, f_meas) / cents_sigma
        if "resistance" in active:
            r = np.concatenate([r, np.log(q_mod / q_meas) / q_sigma])
        return r

    lower = {"speed_scale": 0.7, "end_correction": 0.0, "resistance": 0.0}
    upper = {"speed_scale": 1.4, "end_correction": 5.0, "resistance": 1e3}
    step = {"speed_scale": 1e-4, "end_correction": 1e-3, "resistance": 1e-3}
    active = list(names)
    for attempt in range(3):
        report(0.2 + 0.25 * attempt, "fitting")
        x0 = [unpack([], [])[n] for n in active]
        x0 = [np.clip(v, lower[n] + 1e-9, upper[n] - 1e-9) for v, n in zip(x0, active)]
        sol = least_squares(residuals, x0, args=(active,),
                            bounds=([lower[n] for n in active], [upper[n] for n in active]),
                            diff_step=[step[n] / max(abs(v), 1e-3) for n, v in zip(active, x0)],
                            method="trf", x_scale=[SPANS[n] for n in active], max_nfev=60)
        jac = sol.jac * np.array([SPANS[n] for n in active])[None, :]
        sens = np.linalg.norm(jac, axis=0)
        weak = [n for n, s in zip(active, sens) if s < 1.0 and n != "speed_scale"]
        if not weak:
            break
        for n in weak:
            active.remove(n)
            undetermined.append(n)
    sv = np.linalg.svd(jac, compute_uv=False) if jac.size else np.array([1.0])
    condition = float(sv[0] / sv[-1]) if sv[-1] > 0 else float("inf")
    vals = unpack(sol.x, active)
    fitted = build(vals)
    f_after, q_after = track_modes(fitted, guesses * vals["speed_scale"])
    for n in undetermined:
        warnings.append({"end_correction": "the data cannot determine the hole end correction "
                                           "(no holes, or no modes low enough to feel them): kept the rig's value",
                         "resistance": "the data cannot determine the hole resistance (no holes, or "
                                       "no measured Q that depends on it): kept the rig's value"}[n])
    if condition > 1e4:
        warnings.append(f"the fit is badly conditioned (condition number {condition:.0f}): the "
                        "parameters trade off against each other; treat them with care")
    resid = _cents(f_after, f_meas)
    if np.max(np.abs(resid)) > 20:
        warnings.append(f"the fitted model still misses a mode by {np.max(np.abs(resid)):.0f} cents: "
                        "check the rig's geometry (length, holes) or a spurious peak")
    report(1.0, "fit done")
    return TubeFit(
        sound_speed_m_s=float(gas.sound_speed_m_s * vals["speed_scale"]),
        speed_scale=float(vals["speed_scale"]),
        end_correction=None if not has_holes else float(vals["end_correction"]),
        resistance_pa_s_m3=float(vals["resistance"] * r_scale) if has_holes else 0.0,
        measured_hz=f_meas.tolist(), measured_q=[] if q_meas is None else q_meas.tolist(),
        before_hz=before_f.tolist(), after_hz=f_after.tolist(), after_q=q_after.tolist(),
        residual_cents=resid.tolist(), before_cents=_cents(before_f, f_meas).tolist(),
        undetermined=sorted(set(undetermined)), condition=condition, warnings=warnings)
