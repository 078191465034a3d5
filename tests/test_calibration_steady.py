"""Issue 11 item 5: a calibration recording is read only over the steady part of its sine.

The same 6 Pa sine, with 0, 1 and 5 s of silence around it, read 6, 5 and 3 Pa
before (the amplitude fit ran over the whole file); a low calibration raises
every ceiling.  The recordings here are made from the definitions: a 94 dB SPL
calibrator is 1 Pa rms at 1 kHz (IEC 60942; SPL re 20 uPa, ISO 1683), so a
microphone chain of sensitivity S (full scale per Pa) records it as a sine of
peak S * sqrt(2), and a 6 Pa (zero to peak) sine as a sine of peak 6 S.
"""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

from showkit.analysis.measurement import calibrated_pressure
from showkit.cli.main import main
from showkit.errors import MeasureError

RATE = 48000
SENSITIVITY = 0.02  # full scale per pascal (invented microphone chain)


def _sine(freq_hz, peak, seconds, silence_s=0.0, ramp_s=0.05, seed=0):
    """A sine with raised-cosine ramps, silence around it, and a little noise (-80 dBFS)."""
    n = int(seconds * RATE)
    t = np.arange(n) / RATE
    x = peak * np.sin(2 * np.pi * freq_hz * t + 0.3)
    r = int(ramp_s * RATE)
    ramp = 0.5 * (1 - np.cos(np.pi * np.arange(r) / r))
    x[:r] *= ramp
    x[n - r:] *= ramp[::-1]
    gap = np.zeros(int(silence_s * RATE))
    y = np.concatenate([gap, x, gap])
    return y + 1e-4 * np.random.default_rng(seed).standard_normal(y.size)


CAL = _sine(1000.0, SENSITIVITY * np.sqrt(2), 4.0, silence_s=1.0, seed=1)


@pytest.mark.parametrize("silence_s", [0.0, 1.0, 5.0])
def test_silence_around_the_sine_does_not_lower_the_reading(silence_s):
    rec = _sine(120.0, 6.0 * SENSITIVITY, 10.0, silence_s=silence_s)
    p = calibrated_pressure(rec, CAL, RATE, RATE, 120.0)
    # tolerance 0.5 %: the noise (-80 dBFS against a -18 dBFS sine) and the 1 kHz bin
    # of a 6 s calibrator (1/6 Hz wide) move the fit by far less
    assert p == pytest.approx(6.0, rel=5e-3)


def test_silence_around_the_calibrator_does_not_raise_the_reading():
    rec = _sine(120.0, 6.0 * SENSITIVITY, 10.0)
    for silence in (0.0, 5.0):
        cal = _sine(1000.0, SENSITIVITY * np.sqrt(2), 3.0, silence_s=silence, seed=2)
        assert calibrated_pressure(rec, cal, RATE, RATE, 120.0) == pytest.approx(6.0, rel=5e-3)


def test_a_steady_part_too_short_is_refused():
    rec = _sine(120.0, 6.0 * SENSITIVITY, 0.3, silence_s=2.0, ramp_s=0.05)
    with pytest.raises(MeasureError, match="steady part .* only"):
        calibrated_pressure(rec, CAL, RATE, RATE, 120.0)


def test_an_unsteady_sine_is_refused():
    t = np.arange(6 * RATE) / RATE
    wobble = 1.0 + 0.3 * np.sin(2 * np.pi * 0.7 * t)  # +-3 dB level drift
    rec = 6.0 * SENSITIVITY * wobble * np.sin(2 * np.pi * 120.0 * t)
    with pytest.raises(MeasureError, match="not steady"):
        calibrated_pressure(rec, CAL, RATE, RATE, 120.0)


def test_measure_level_from_files_reads_six_pascals_with_silence(tmp_path, capsys):
    from showkit.rigfile import load_rig

    rec_path, cal_path = tmp_path / "rec.wav", tmp_path / "cal.wav"
    freq_hz = load_rig().drive.reference_frequency_hz  # the demo rig's calibration sine
    sf.write(rec_path, _sine(freq_hz, 6.0 * SENSITIVITY, 10.0, silence_s=5.0).astype(np.float32), RATE,
             subtype="FLOAT")
    sf.write(cal_path, CAL.astype(np.float32), RATE, subtype="FLOAT")
    assert main(["measure", "level", "--recording", str(rec_path), "--calibrator", str(cal_path),
                 "--json"]) == 0
    import json

    out = json.loads(capsys.readouterr().out)
    assert out["reference_pressure"] == pytest.approx(6.0, rel=5e-3)
