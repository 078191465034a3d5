"""From digital signal to volume velocity at the membrane (DEVELOPERS.md Methods §5).

The loudspeaker behind the membrane is a volume-velocity source ``U(omega)``.
Until a measured response replaces it, the default drive model is a
voltage-driven moving-coil driver: a second-order band-pass with its
resonance at ``speaker_resonance_hz`` and total Q ``speaker_q``,

    U / x  proportional to  j omega / (omega_s^2 - omega^2 + j omega omega_s / Q_s)

which above the resonance is mass-controlled (cone acceleration flat per
volt, ``U`` proportional to ``1/omega``) and below it stiffness-controlled
(no response at DC).

The absolute scale comes from one calibration point: a sine at
``reference_frequency_hz`` played at ``reference_level_dbfs`` (peak) gives a
pressure amplitude ``reference_pressure_pa`` (zero to peak) at the rigid cap.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np

DRIVE_MODEL_NAME = "mass-controlled driver (2nd-order band-pass)"


@dataclass(frozen=True)
class DriveCalibration:
    """The rig's ``[drive]`` section in SI.

    Attributes
    ----------
    reference_frequency_hz : float
        Frequency of the calibration sine, Hz.
    reference_level_dbfs : float
        Peak level of the calibration sine at the output, dBFS (0 = full scale).
    reference_pressure_pa : float
        Pressure amplitude (zero to peak) measured at the rigid cap, Pa.
    speaker_resonance_hz : float
        Resonance of the driver on its membrane, Hz.
    speaker_q : float
        Total Q of that resonance.
    response_freq_hz, response_db : tuple of float
        A measured relative drive response (dB) replacing the default model
        where given (empty: use the default model).
    """

    reference_frequency_hz: float = 100.0
    reference_level_dbfs: float = -20.0
    reference_pressure_pa: float = 10.0
    speaker_resonance_hz: float = 55.0
    speaker_q: float = 0.7
    response_freq_hz: tuple[float, ...] = ()
    response_db: tuple[float, ...] = ()

    @property
    def model_name(self) -> str:
        return "measured drive response" if self.response_freq_hz else DRIVE_MODEL_NAME

    def brief(self) -> str:
        """The calibration and drive model in a few words (for narrow screens)."""
        model = "measured drive" if self.response_freq_hz else "default driver model"
        return (f"{self.reference_pressure_pa:g} Pa at {self.reference_frequency_hz:g} Hz, "
                f"{self.reference_level_dbfs:g} dBFS; {model}")

    def describe(self) -> str:
        """One line saying which calibration and drive model a level rests on."""
        return (f"calibration {self.reference_pressure_pa:g} Pa at the cap for "
                f"{self.reference_frequency_hz:g} Hz at {self.reference_level_dbfs:g} dBFS; "
                f"{self.model_name}"
                + ("" if self.response_freq_hz else
                   f", resonance {self.speaker_resonance_hz:g} Hz, Q {self.speaker_q:g}"))


def _model_shape(f: np.ndarray, drive: DriveCalibration) -> np.ndarray:
    """The default driver: a second-order band-pass (complex, arbitrary scale)."""
    w = 2.0 * np.pi * f
    ws = 2.0 * np.pi * drive.speaker_resonance_hz
    return 1j * w * ws / (ws * ws - w * w + 1j * w * ws / drive.speaker_q)


def _measured_db(f: np.ndarray, drive: DriveCalibration) -> np.ndarray:
    """The measured magnitude in dB; outside the measured range the default model,
    joined at the nearest measured end (never assume the drive vanishes there:
    that would hide content from the ceilings)."""
    rf = np.asarray(drive.response_freq_hz)
    rd = np.asarray(drive.response_db)
    default_db = 20.0 * np.log10(np.maximum(np.abs(_model_shape(f, drive)), 1e-30))
    edge_db = 20.0 * np.log10(np.abs(_model_shape(rf[[0, -1]], drive)))
    measured = np.interp(f, rf, rd)
    measured = np.where(f < rf[0], default_db - edge_db[0] + rd[0], measured)
    return np.where(f > rf[-1], default_db - edge_db[1] + rd[-1], measured)


#: Grid of the minimum-phase construction: points and top frequency (Hz).
_MIN_PHASE_POINTS = 1 << 15
_MIN_PHASE_TOP_HZ = 24000.0


def _minimum_phase(drive: DriveCalibration) -> tuple[np.ndarray, np.ndarray]:
    """Frequencies and unwrapped minimum phase of the measured magnitude.

    The real-cepstrum (homomorphic) construction: fold the cepstrum of
    ``log |D|`` onto positive quefrencies (Oppenheim & Schafer,
    *Discrete-Time Signal Processing*, 3rd ed., section 13.8).  A measured
    magnitude paired with the model's phase is not a causal response, and its
    impulse response would never ring down; the minimum-phase one is causal.
    Kept for the last few responses: it depends on the measured response and the
    speaker model only, not on the calibration point.
    """
    return _minimum_phase_of(DriveCalibration(speaker_resonance_hz=drive.speaker_resonance_hz,
                                              speaker_q=drive.speaker_q,
                                              response_freq_hz=drive.response_freq_hz,
                                              response_db=drive.response_db))


@lru_cache(maxsize=8)
def _minimum_phase_of(drive: DriveCalibration) -> tuple[np.ndarray, np.ndarray]:
    n = 2 * (_MIN_PHASE_POINTS - 1)
    grid = np.linspace(0.0, _MIN_PHASE_TOP_HZ, _MIN_PHASE_POINTS)
    log_mag = _measured_db(np.maximum(grid, grid[1] / 4.0), drive) * (np.log(10.0) / 20.0)
    cep = np.fft.irfft(log_mag, n=n)
    fold = np.zeros_like(cep)
    fold[0] = cep[0]
    fold[1:n // 2] = 2.0 * cep[1:n // 2]
    fold[n // 2] = cep[n // 2]
    phase = np.unwrap(np.imag(np.fft.rfft(fold, n=n)))
    return grid, phase


def driver_shape(freq_hz, drive: DriveCalibration) -> np.ndarray:
    """Relative volume velocity per unit digital signal (complex, arbitrary scale).

    The default model, or -- when the rig holds a measured response -- its
    magnitude with the minimum phase that magnitude implies.

    Parameters
    ----------
    freq_hz : array_like
        Frequencies, Hz.
    drive : DriveCalibration
    """
    f = np.asarray(freq_hz, dtype=float)
    if not drive.response_freq_hz:
        return _model_shape(f, drive)
    grid, phase = _minimum_phase(drive)
    return 10.0 ** (_measured_db(f, drive) / 20.0) * np.exp(1j * np.interp(f, grid, phase))
