"""From digital signal to volume velocity at the membrane (physics.md section 5).

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

    def describe(self) -> str:
        """One line saying which calibration and drive model a level rests on."""
        return (f"calibration {self.reference_pressure_pa:g} Pa at the cap for "
                f"{self.reference_frequency_hz:g} Hz at {self.reference_level_dbfs:g} dBFS; "
                f"{self.model_name}"
                + ("" if self.response_freq_hz else
                   f", resonance {self.speaker_resonance_hz:g} Hz, Q {self.speaker_q:g}"))


def driver_shape(freq_hz, drive: DriveCalibration) -> np.ndarray:
    """Relative volume velocity per unit digital signal (complex, arbitrary scale).

    Parameters
    ----------
    freq_hz : array_like
        Frequencies, Hz.
    drive : DriveCalibration
    """
    f = np.asarray(freq_hz, dtype=float)
    w = 2.0 * np.pi * f
    ws = 2.0 * np.pi * drive.speaker_resonance_hz
    shape = 1j * w * ws / (ws * ws - w * w + 1j * w * ws / drive.speaker_q)
    if drive.response_freq_hz:
        # outside the measured range follow the default model, joined at the
        # nearest measured end (never assume the drive vanishes there: that
        # would hide content from the ceilings)
        rf = np.asarray(drive.response_freq_hz)
        rd = np.asarray(drive.response_db)
        default_db = 20.0 * np.log10(np.maximum(np.abs(shape), 1e-30))
        measured = np.interp(f, rf, rd)
        if rf.size:
            edge = driver_shape(rf[[0, -1]], DriveCalibration(
                speaker_resonance_hz=drive.speaker_resonance_hz, speaker_q=drive.speaker_q))
            edge_db = 20.0 * np.log10(np.abs(edge))
            measured = np.where(f < rf[0], default_db - edge_db[0] + rd[0], measured)
            measured = np.where(f > rf[-1], default_db - edge_db[1] + rd[-1], measured)
        shape = 10.0 ** (measured / 20.0) * np.exp(1j * np.angle(shape))
    return shape
