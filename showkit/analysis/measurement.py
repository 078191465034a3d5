"""A measurement from a recording: response, resonances, fit and drive response; levels.

The steps of `showkit measure` that turn recordings into numbers, kept out of
the command line so the UI and scripts call the same functions.
"""

from __future__ import annotations

import numpy as np

from showkit.analysis.audio import first_channel
from showkit.analysis.drivefit import drive_response_db
from showkit.analysis.resonances import find_resonances
from showkit.analysis.sweep import check_audio, measure_response
from showkit.analysis.tubefit import fit_tube, variant
from showkit.conditions import REFERENCE_FREQUENCY_MAX_HZ, check_reference_frequency
from showkit.errors import MeasureError
from showkit.physics.biasflow import jet_velocity_m_s
from showkit.physics.family import SUGGEST_TOP_OF_LIMIT, check_reference


def analyse_recording(rig, recording, rec_rate, sweep, sweep_rate, where="recording", progress=None,
                      response=None) -> dict:
    """The whole analysis: response, resonances, fit, drive response -> report dict.

    ``response``: the recording's response already measured from these same signals
    (:func:`showkit.analysis.sweep.measure_response`), so that a caller that draws it
    too deconvolves the recording once; None measures it here.
    """
    resp = response if response is not None else \
        measure_response(recording, rec_rate, sweep, sweep_rate, where, progress=progress)
    f_hi = min(resp.band_hz[1] / 1.1, rig.model.plane_wave_limit_hz)
    found = find_resonances(resp.freq_hz, resp.response, resp.band_hz[0] * 1.1, f_hi, noise=resp.noise)
    warnings = list(resp.warnings)
    if not found:
        raise MeasureError("no resonances found in the recording", where,
                           "record at the cap with the sweep loud enough to hear the tube ring")
    jet = jet_velocity_m_s(rig.static_pa, rig.gas.density_kg_m3)
    fit = fit_tube(rig.model, [r.frequency_hz for r in found], [r.q for r in found], jet_m_s=jet)
    warnings += fit.warnings
    holes = bool(rig.geometry.hole_count)
    fitted = variant(rig.model, fit.speed_scale, fit.end_correction,
                     fit.resistance_pa_s_m3 if holes else None, fit.flow_scale * jet if holes else None)
    d_f, d_db = drive_response_db(resp.freq_hz, resp.response, fitted, rig.drive,
                                  (resp.band_hz[0] * 1.1, resp.band_hz[1] / 1.1))
    return {
        "modes": [{"frequency_hz": r.frequency_hz, "q": r.q, "level_db": r.level_db,
                   "q_method": r.q_method} for r in found],
        "fit": {"sound_speed_m_s": fit.sound_speed_m_s, "rig_sound_speed_m_s": rig.gas.sound_speed_m_s,
                "residual_cents": fit.residual_cents, "rms_cents": fit.rms_cents,
                "before_cents": fit.before_cents, "model_hz": fit.after_hz, "model_q": fit.after_q,
                "rig_model_hz": fit.before_hz, "end_correction": fit.end_correction,
                "resistance_pa_s_m3": fit.resistance_pa_s_m3, "undetermined": fit.undetermined,
                "condition": fit.condition, "hole_model": fit.hole_model, "flow": fit.flow_scale,
                "flow_range": None if fit.flow_range is None else list(fit.flow_range),
                "resistance_range": None if fit.resistance_range is None else list(fit.resistance_range),
                "model_costs": fit.model_costs},
        "drive_response": {"frequency_hz": d_f, "db": d_db},
        "recording": {"delay_s": resp.delay_s, "snr_db": resp.snr_db, "band_hz": list(resp.band_hz)},
        "warnings": warnings,
    }


def sine_amplitude(signal, rate: float, freq_hz: float) -> float:
    """Amplitude (zero to peak) of the component at ``freq_hz``, by a least-squares sine fit."""
    x = first_channel(signal)
    t = np.arange(x.size) / rate
    basis = np.stack([np.cos(2 * np.pi * freq_hz * t), np.sin(2 * np.pi * freq_hz * t), np.ones_like(t)], 1)
    coef, *_ = np.linalg.lstsq(basis, x, rcond=None)
    return float(np.hypot(coef[0], coef[1]))


#: The steady part of a calibration sine: frames within this of its level, dB.
STEADY_TOLERANCE_DB = 0.5
#: Shortest steady part accepted, s (and at least :data:`STEADY_MIN_PERIODS` periods).
STEADY_MIN_S = 0.5
STEADY_MIN_PERIODS = 20
#: Share of the sine's "on" part (within 6 dB of its level) that must be steady.
STEADY_MIN_SHARE = 0.8


def _frame_amplitudes(x, rate: float, freq_hz: float):
    """Amplitude of the ``freq_hz`` component per frame (Hann-weighted lock-in), and the frame length.

    Frames are a whole number of periods where the rate allows, at least 4 periods and 50 ms.
    """
    periods = max(4, int(np.ceil(0.05 * freq_hz)))
    n = max(8, int(round(periods * rate / freq_hz)))
    count = x.size // n
    if count == 0:
        return np.zeros(0), n
    frames = x[:count * n].reshape(count, n)
    t = np.arange(count * n).reshape(count, n) / rate
    w = np.hanning(n + 2)[1:-1]
    z = (frames - frames.mean(axis=1, keepdims=True)) * np.exp(-2j * np.pi * freq_hz * t)
    return 2.0 * np.abs(z @ w) / w.sum(), n


def steady_part(signal, rate: float, freq_hz: float, where: str = "recording",
                role: str = "recording") -> tuple[int, int]:
    """Sample range ``(start, end)`` of the steady part of a sine at ``freq_hz`` in a recording.

    Onset and offset detection on the sine's own amplitude (a lock-in at ``freq_hz``
    per frame of a few periods, so room noise at other frequencies does not count):
    the sine is "on" where a frame is within 6 dB of its level (the median of the
    frames above half the largest), and steady where a frame is within
    :data:`STEADY_TOLERANCE_DB` of that level.  The longest steady run is the part
    a level may be read from: silence, fades, the start and the end of the
    recording are left out, so silence around the sine cannot make it read low.

    Raises
    ------
    MeasureError
        The steady part is shorter than :data:`STEADY_MIN_S` (or 20 periods), or
        less than :data:`STEADY_MIN_SHARE` of the "on" part is steady (the level wanders).
    """
    x = first_channel(signal)
    amp, n = _frame_amplitudes(x, rate, freq_hz)
    need = max(STEADY_MIN_S, STEADY_MIN_PERIODS / freq_hz)
    if amp.size == 0 or not np.any(amp > 0):
        raise MeasureError(f"no {freq_hz:g} Hz sine found in the {role}", where,
                           f"record the sine for a few seconds (at least {need:.1f} s steady)")
    level = float(np.median(amp[amp >= 0.5 * amp.max()]))
    on = amp >= level * 10 ** (-6.0 / 20)
    steady = np.abs(20 * np.log10(np.maximum(amp, 1e-300) / level)) <= STEADY_TOLERANCE_DB
    best, best_start, run, run_start = 0, 0, 0, 0
    for k, s_ in enumerate(steady):  # a loop over frames (a few hundred), not samples
        run = run + 1 if s_ else 0
        run_start = k - run + 1
        if run > best:
            best, best_start = run, run_start
    seconds = best * n / rate
    on_seconds = np.count_nonzero(on) * n / rate
    if on_seconds >= need and best < STEADY_MIN_SHARE * np.count_nonzero(on):
        spread = 20 * np.log10(np.percentile(amp[on], 95) / np.percentile(amp[on], 5))
        raise MeasureError(f"the {freq_hz:g} Hz sine in the {role} is not steady: its level wanders by "
                           f"{spread:.1f} dB", where,
                           "hold the level steady while recording (no fades, no other sounds)")
    if seconds < need:
        raise MeasureError(f"the steady part of the {freq_hz:g} Hz sine in the {role} is only "
                           f"{seconds:.2f} s (at least {need:.2f} s needed)", where,
                           "record the sine longer, with the level held, and start recording before it")
    return best_start * n, (best_start + best) * n


def calibrated_pressure(recording, calibrator, rate: float, cal_rate: float, freq_hz: float,
                        where: str = "recording") -> float:
    """Pressure amplitude at ``freq_hz`` (Pa, zero to peak) from a mic checked with a 94 dB calibrator.

    The calibrator gives 94 dB SPL = 1 Pa rms at 1 kHz (IEC 60942; SPL re 20 uPa, ISO 1683), so
    the microphone chain reads ``1 Pa * sqrt 2`` per its fitted 1 kHz amplitude.  Both
    amplitudes are fitted over the steady part of each sine only (:func:`steady_part`):
    silence or fades around a sine would otherwise read low, and a low calibration
    raises every ceiling.
    """
    check_audio(calibrator, "calibrator", "calibrator recording")
    check_audio(recording, where)
    cal = first_channel(calibrator)
    spec = np.abs(np.fft.rfft(cal * np.hanning(cal.size)))
    f_peak = np.fft.rfftfreq(cal.size, 1 / cal_rate)[int(np.argmax(spec))]
    if abs(f_peak - 1000.0) > 50.0:
        raise MeasureError(f"the calibrator recording peaks at {f_peak:.0f} Hz, not 1 kHz", "--calibrator",
                           "record the 94 dB SPL, 1 kHz calibrator on the microphone")
    a, b = steady_part(cal, cal_rate, f_peak, "--calibrator", "calibrator recording")
    cal_amp = sine_amplitude(cal[a:b], cal_rate, f_peak)
    rec = first_channel(recording)
    a, b = steady_part(rec, rate, freq_hz, where)
    return sine_amplitude(rec[a:b], rate, freq_hz) * np.sqrt(2.0) / cal_amp


# --------------------------------------------------------------- the level calibration
# The steps of `showkit measure level`, here so the UI and scripts can call them too; the
# command line only parses, plays and prints.

REFERENCE_RATE_HZ = 48000
REFERENCE_LENGTH_S = 10.0
REFERENCE_RAMP_S = 0.05
#: the part of a played 10 s reference sine read for the pressure, s (away from the fades)
PLAYED_STEADY_S = (1.0, 9.0)
SPL_REFERENCE_PA = 20e-6  # ISO 1683: sound pressure level re 20 uPa


def reference_frequency(rig, asked_hz: float | None, where: str = "--frequency") -> tuple[float, str | None]:
    """The calibration frequency, Hz, and a note when showkit picked it (else None).

    ``asked_hz`` is taken if the tube's losses cannot move the cap reading there (else a
    one-line refusal naming a frequency that will do); without it, the rig's own if
    accepted, else the one :func:`showkit.physics.family.suggest_reference` picks near it (the one
    the rig file's refusal names).

    Parameters
    ----------
    rig : Rig
        The rig (its loss family and present calibration).
    asked_hz : float or None
        The frequency asked for, Hz.
    where : str
        Where it was asked (the option), for the error.
    """
    family = rig.loss_family
    if asked_hz is not None:
        # the calibration door's own checks first: finite, within limits, below the plane-wave limit
        asked_hz = check_reference_frequency(asked_hz, where, rig.model)
        check = check_reference(family, asked_hz, REFERENCE_FREQUENCY_MAX_HZ)
        if not check.ok:
            fix = (f"use {where} {check.suggestion_hz:g}, or leave {where} out and showkit picks one"
                   if check.suggestion_hz else "measure the tube first (showkit measure analyse)")
            raise MeasureError(check.message(), where, fix)
        return float(asked_hz), None
    own = rig.drive.reference_frequency_hz
    own_check = check_reference(family, own, REFERENCE_FREQUENCY_MAX_HZ)
    if own_check.ok:
        return own, None
    picked = own_check.suggestion_hz  # the one the rig file's refusal names
    if picked is None:
        top_hz = min(SUGGEST_TOP_OF_LIMIT * family.base.plane_wave_limit_hz, REFERENCE_FREQUENCY_MAX_HZ)
        raise MeasureError(f"no frequency up to {top_hz:.0f} Hz gives a cap reading the tube's losses "
                           "cannot move", "measure level", "measure the tube first (showkit measure analyse)")
    return picked, (f"calibrating at {picked:g} Hz, between modes: the rig's {own:g} Hz is where the tube's "
                    "losses move the reading")


def reference_sine(freq_hz: float, level_dbfs: float, rate_hz: int = REFERENCE_RATE_HZ,
                   length_s: float = REFERENCE_LENGTH_S, ramp_s: float = REFERENCE_RAMP_S):
    """The calibration sine: ``level_dbfs`` peak at ``freq_hz`` for ``length_s`` s, ramps of ``ramp_s`` s.

    A cue's tone and fades (:mod:`showkit.analysis.signals`: raised-cosine ramps).

    Parameters
    ----------
    freq_hz : float
        Frequency, Hz.
    level_dbfs : float
        Peak level, dB re full scale.
    rate_hz : int
        Sample rate, Hz.
    length_s, ramp_s : float
        Length and fade-in/fade-out time, s.
    """
    from showkit.analysis.signals import fade, tone

    return fade(10 ** (level_dbfs / 20) * tone(freq_hz, length_s, rate_hz), rate_hz, ramp_s, ramp_s,
                "reference sine")


def signal_headroom_db(rig, samples, rate_hz: int) -> float:
    """How far a measurement signal (a sweep, a reference sine) may be raised before a hole of any
    member of the rig's loss family goes below the reserve line, dB (negative: it must come down).

    The signal is simulated through every member, as a cue's ceiling is
    (:func:`showkit.analysis.pressure.signal_report`, on the rig's present calibration).
    """
    from showkit.analysis.pressure import signal_report

    return float(signal_report(rig, samples, rate_hz, flames=False).ceiling_db)


def check_reference_sine(rig, sine, rate_hz: int, level_dbfs: float, where: str = "--level") -> float:
    """The sine's headroom below its ceiling, dB; a MeasureError when it would take a hole below the line
    (:func:`signal_headroom_db`)."""
    headroom = signal_headroom_db(rig, sine, rate_hz)
    _refuse_below_line(headroom, f"the reference sine at {level_dbfs:g} dBFS", where,
                       f"give --level {level_dbfs + headroom - 1:.0f} or lower")
    return headroom


def _refuse_below_line(headroom_db: float, what: str, where: str, fix: str) -> None:
    """A MeasureError when a measurement signal's headroom is negative (it would take a hole below
    the safe line), saying how far it must come down."""
    if headroom_db < 0:
        raise MeasureError(f"{what} would take a hole below the safe line (it must come down "
                           f"{max(-headroom_db, 0.01):.2f} dB)", where, fix)


#: A sweep is never written louder than this, dBFS (headroom for the converter).
SWEEP_MAX_DBFS = -1.0


def sweep_bound_db(rig, spec) -> tuple[float, float]:
    """The loudest peak level, dBFS, of the sweep ``spec`` (its level ignored) that keeps every hole
    above the reserve line, and the frequency where the best estimate is most sensitive, Hz.

    The lower of two bounds: the best estimate's steady state at every frequency of the sweep
    (:func:`showkit.analysis.drivefit.sweep_amplitude_bound`), and the sweep itself simulated in
    time through every member of the loss family (:func:`signal_headroom_db`).  The first alone
    let the default sweep (6 dB under it) take a hole 0.5-0.8 dB below the line in the still-gas
    member, whose modes ring with Q in the hundreds; never above :data:`SWEEP_MAX_DBFS`.
    """
    from dataclasses import replace

    from showkit.analysis.drivefit import sweep_amplitude_bound
    from showkit.analysis.sweep import exponential_sweep

    limit_hz = rig.model.plane_wave_limit_hz
    if spec.f_start_hz >= limit_hz:  # the model knows the tube below that limit only
        raise MeasureError(f"the sweep starts at {spec.f_start_hz:g} Hz, at or above the tube's plane-wave "
                           f"limit ({limit_hz:.0f} Hz), where the model says nothing", "--start",
                           "start the sweep among the tube's modes (e.g. --start 20)")
    amplitude, f_worst = sweep_amplitude_bound(rig.model, rig.drive, rig.static_pa, rig.reserve,
                                               (spec.f_start_hz, spec.f_stop_hz))
    level_db = min(20.0 * np.log10(amplitude), SWEEP_MAX_DBFS)
    x = exponential_sweep(replace(spec, amplitude=10.0 ** (level_db / 20.0)))
    bound_db = level_db + min(signal_headroom_db(rig, x, spec.sample_rate_hz), 0.0)
    # down to a tenth of a dB (as printed), so that a sweep written at the bound passes its check
    return float(np.floor(bound_db * 10.0) / 10.0), f_worst


def check_sweep(rig, sweep, rate_hz: int, where: str) -> float:
    """The headroom of a sweep file about to be played, dB; a MeasureError when it would take a hole
    below the line (:func:`signal_headroom_db`)."""
    headroom = signal_headroom_db(rig, sweep, rate_hz)
    _refuse_below_line(headroom, "the sweep", where,
                       "write it again for today's tube with `showkit measure sweep` (give it the same "
                       "--temperature and --static as here), which keeps its level safe")
    return headroom


def played_pressure(played, calibrator, rate_hz: float, cal_rate_hz: float, freq_hz: float) -> float:
    """Pressure amplitude (Pa, zero to peak) of a played reference sine recorded at the cap.

    Only :data:`PLAYED_STEADY_S` of the recording is read (away from the fades), then
    :func:`calibrated_pressure` with the calibrator recording.
    """
    a, b = (int(s * rate_hz) for s in PLAYED_STEADY_S)
    return calibrated_pressure(played[a:b], calibrator, rate_hz, cal_rate_hz, freq_hz, "live recording")


def calibration_values(drive) -> dict:
    """The ``[drive]`` reference values of a calibration, and the reading as SPL.

    ``spl_db`` is the zero-to-peak pressure as a sine's rms re 20 uPa (ISO 1683).
    """
    p = drive.reference_pressure_pa
    return {"reference_frequency": drive.reference_frequency_hz, "reference_level": drive.reference_level_dbfs,
            "reference_pressure": p, "spl_db": 20 * np.log10(p / np.sqrt(2) / SPL_REFERENCE_PA)}
