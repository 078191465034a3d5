"""A measurement from a recording: response, resonances, fit and drive response; levels.

The steps of `showkit measure` that turn recordings into numbers, kept out of
the command line so the UI and scripts call the same functions.
"""

from __future__ import annotations


def analyse_recording(rig, recording, rec_rate, sweep, sweep_rate, where="recording", progress=None) -> dict:
    """The whole analysis: response, resonances, fit, drive response -> report dict."""
    from showkit.analysis.drivefit import drive_response_db
    from showkit.analysis.resonances import find_resonances
    from showkit.analysis.sweep import measure_response
    from showkit.analysis.tubefit import fit_tube, variant
    from showkit.errors import MeasureError

    resp = measure_response(recording, rec_rate, sweep, sweep_rate, where, progress=progress)
    f_hi = min(resp.band_hz[1] / 1.1, rig.model.plane_wave_limit_hz)
    found = find_resonances(resp.freq_hz, resp.response, resp.band_hz[0] * 1.1, f_hi, noise=resp.noise)
    warnings = list(resp.warnings)
    if not found:
        raise MeasureError("no resonances found in the recording", where,
                           "record at the cap with the sweep loud enough to hear the tube ring")
    from showkit.physics.biasflow import jet_velocity_m_s

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
    import numpy as np

    x = np.asarray(signal, dtype=float)
    if x.ndim == 2:
        x = x[:, 0]
    t = np.arange(x.size) / rate
    basis = np.stack([np.cos(2 * np.pi * freq_hz * t), np.sin(2 * np.pi * freq_hz * t), np.ones_like(t)], 1)
    coef, *_ = np.linalg.lstsq(basis, x, rcond=None)
    return float(np.hypot(coef[0], coef[1]))


def calibrated_pressure(recording, calibrator, rate: float, cal_rate: float, freq_hz: float,
                        where: str = "recording") -> float:
    """Pressure amplitude at ``freq_hz`` (Pa, zero to peak) from a mic checked with a 94 dB calibrator.

    The calibrator gives 94 dB SPL = 1 Pa rms at 1 kHz (IEC 60942; SPL re 20 uPa, ISO 1683), so
    the microphone chain reads ``1 Pa * sqrt 2`` per its fitted 1 kHz amplitude.
    """
    import numpy as np

    from showkit.analysis.sweep import check_audio
    from showkit.errors import MeasureError

    check_audio(calibrator, "calibrator", "calibrator recording")
    check_audio(recording, where)
    cal = np.asarray(calibrator, dtype=float)
    cal = cal[:, 0] if cal.ndim == 2 else cal
    spec = np.abs(np.fft.rfft(cal * np.hanning(cal.size)))
    f_peak = np.fft.rfftfreq(cal.size, 1 / cal_rate)[int(np.argmax(spec))]
    if abs(f_peak - 1000.0) > 50.0:
        raise MeasureError(f"the calibrator recording peaks at {f_peak:.0f} Hz, not 1 kHz", "--calibrator",
                           "record the 94 dB SPL, 1 kHz calibrator on the microphone")
    cal_amp = sine_amplitude(cal, cal_rate, f_peak)
    return sine_amplitude(recording, rate, freq_hz) * np.sqrt(2.0) / cal_amp
