"""The drive side of a measurement: the measured drive response and a safe sweep level.

- Drive response: the measured cap response is ``M(f) = k D(f) H_cap(f)``
  (DEVELOPERS.md Methods §5: recorder sensitivity ``k``, drive ``D``, tube
  ``H_cap``).  Dividing by the fitted model's ``H_cap`` gives ``|D|`` up to
  a constant; it is averaged by energy in sixth-octave bands
  (``|D|^2 = sum |M|^2 / sum |H_cap|^2``), which keeps small mismatches of
  the model at the resonances from printing ripples, and normalised to 0 dB
  at the calibration frequency (or the band's geometric centre).
- Sweep level: a steady sine at ``f`` of amplitude ``A`` gives at hole ``i``
  the pressure amplitude ``|G_i(f)| A`` with ``G_i = K D(f) H_i(f)`` and
  ``K`` fixed by the calibration point (a sine at ``reference_frequency``
  and ``reference_level`` dBFS peak gives ``reference_pressure`` zero-to-peak
  at the cap).  The safe-level rule (DEVELOPERS.md Methods §7) then bounds the
  sweep amplitude by ``max_{i,f} |G_i(f)| A <= (1 - reserve) static_pa``.
  A sweep passes each resonance in finite time, so its response stays near
  or below the steady-state value; the bound is the steady state.
"""

from __future__ import annotations

import numpy as np

from showkit.physics.drive import driver_shape
from showkit.physics.modes import find_modes


def drive_response_db(freq_hz: np.ndarray, measured: np.ndarray, model, drive,
                      band_hz: tuple[float, float], per_octave: int = 6) -> tuple[np.ndarray, np.ndarray]:
    """Relative drive response (dB) on a fractional-octave grid from a measured cap response.

    Parameters
    ----------
    freq_hz : ndarray
        Frequencies of the measurement, Hz.
    measured : ndarray of complex
        Measured cap response (recorded per played full scale).
    model : TubeModel
        The fitted tube model.
    drive : DriveCalibration
        For the normalisation frequency.
    band_hz : (float, float)
        Range to report, Hz.
    per_octave : int
        Bands per octave.
    """
    f = np.asarray(freq_hz, dtype=float)
    h = model.response(f).cap_pressure
    lo, hi = band_hz
    centres = lo * 2.0 ** (np.arange(0.0, np.log2(hi / lo) * per_octave + 1e-9) / per_octave)
    half = 2.0 ** (0.5 / per_octave)
    m2 = np.abs(measured) ** 2
    h2 = np.abs(h) ** 2
    out_f, out_db = [], []
    for fc in centres:
        sel = (f >= fc / half) & (f < fc * half)
        if np.count_nonzero(sel) < 2:
            continue
        out_f.append(fc)
        out_db.append(10.0 * np.log10(m2[sel].sum() / h2[sel].sum()))
    out_f, out_db = np.array(out_f), np.array(out_db)
    f_norm = drive.reference_frequency_hz if lo <= drive.reference_frequency_hz <= hi else np.sqrt(lo * hi)
    out_db = out_db - np.interp(f_norm, out_f, out_db)
    return out_f, out_db


def hole_gain(model, drive, freq_hz: np.ndarray) -> np.ndarray:
    """``|G_i(f)|``: pressure amplitude per unit digital amplitude, Pa, shape (holes or 1, F).

    Plain pipes (no holes) use the cap.
    """
    f_ref = np.array([drive.reference_frequency_hz])
    ref = model.response(f_ref)
    a_ref = 10.0 ** (drive.reference_level_dbfs / 20.0)
    k = drive.reference_pressure_pa / (a_ref * np.abs(driver_shape(f_ref, drive) * ref.cap_pressure)[0])
    resp = model.response(freq_hz)
    p = resp.hole_pressure if model.geometry.hole_count else resp.cap_pressure[None, :]
    return k * np.abs(driver_shape(freq_hz, drive))[None, :] * np.abs(p)


def sweep_amplitude_bound(model, drive, static_pa: float, reserve: float,
                          band_hz: tuple[float, float]) -> tuple[float, float]:
    """Largest sweep amplitude (full scale = 1) that keeps every hole above the reserve.

    Returns ``(amplitude, frequency_hz)``: the bound and the frequency where the
    tube is most sensitive.  The grid holds every model mode in the band and a
    0.1 % log grid.

    Parameters
    ----------
    model : TubeModel
    drive : DriveCalibration
    static_pa : float
        Static overpressure, Pa.
    reserve : float
        Reserve fraction of the static pressure.
    band_hz : (float, float)
        The sweep's range, Hz.
    """
    lo, hi = band_hz
    hi = min(hi, model.plane_wave_limit_hz)
    grid = np.exp(np.arange(np.log(lo), np.log(hi), 1e-3))
    modes = [m.frequency_hz for m in find_modes(model, hi) if lo <= m.frequency_hz <= hi]
    grid = np.unique(np.concatenate([grid, modes]))
    gain = hole_gain(model, drive, grid).max(axis=0)
    k = int(np.argmax(gain))
    return float((1.0 - reserve) * static_pa / gain[k]), float(grid[k])
