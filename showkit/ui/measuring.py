"""The Measure view's domain work: a recording of the sweep analysed, the fit written (no Textual here).

The analysis is :func:`showkit.analysis.measurement.analyse_recording` (the same as
`showkit measure analyse`); the response drawn is the one it fits,
:func:`showkit.analysis.sweep.measure_response`'s, measured once and handed to it
(the recording is deconvolved once).  Writing the fit goes through
:func:`showkit.rigwrite.write_fit` (checked, atomic, previous file kept as ``.bak``).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from pathlib import Path

from showkit.errors import RigError


@dataclass
class Measurement:
    """What the Measure view shows: the files, the response curve and the analysis report."""

    recording: Path
    sweep: Path
    freq_hz: object       # the response's frequencies, Hz
    level_db: object      # the response magnitude, dB re its peak
    report: dict
    rig_name: str

    def rms_before_cents(self) -> float:
        """How far the rig file's model was from the measured modes, cents rms."""
        v = [float(x) for x in self.report["fit"]["before_cents"]]
        return math.sqrt(sum(x * x for x in v) / len(v)) if v else 0.0


def measure_files(rig, rec_path: Path, sweep_path: Path, progress=None) -> Measurement:
    """Read a recording and its sweep and analyse them (slow: run it in a worker).

    ``progress(done, total, text)`` is called as the work goes on.  The response is
    measured once (:func:`~showkit.analysis.sweep.measure_response`) and given to
    :func:`~showkit.analysis.measurement.analyse_recording`; the curve drawn is its
    magnitude in dB re its peak.
    """
    import numpy as np

    from showkit.analysis.audio import read_whole
    from showkit.analysis.measurement import analyse_recording
    from showkit.analysis.sweep import measure_response

    progress = progress or (lambda done, total, text=None: None)
    rec, rec_rate = read_whole(rec_path, "recording")  # a regular file within the limits, or one line
    sweep, sweep_rate = read_whole(sweep_path, "sweep")
    progress(0, 300, "response")

    def inner(fraction, text=""):  # measure_response reports (fraction 0..1, text)
        progress(int(round(250 * float(fraction))), 300, text)

    resp = measure_response(rec, rec_rate, sweep, sweep_rate, str(rec_path), progress=inner)
    progress(250, 300, "analysis")
    report = analyse_recording(rig, rec, rec_rate, sweep, sweep_rate, str(rec_path), response=resp)
    progress(300, 300, None)
    mag = np.abs(resp.response)
    with np.errstate(divide="ignore"):
        level = 20 * np.log10(np.maximum(mag, 1e-30) / max(float(mag.max()), 1e-30))
    return Measurement(Path(rec_path), Path(sweep_path), np.asarray(resp.freq_hz), level, report, rig.name)


def is_demo_rig(path) -> bool:
    """True for the bundled demo rig (never changed)."""
    from showkit.rigfile import demo_rig_path

    return path is None or Path(path).resolve() == demo_rig_path().resolve()


def calibration_refused(path: Path) -> str | None:
    """Why the rig file's calibration point is now refused (after a fit moved the modes), or None."""
    from showkit.rigfile import load_rig

    try:
        load_rig(path)
    except RigError as exc:
        if "reference_frequency" in exc.where:
            return exc.what
        raise
    return None


def write_fit(path: Path, report: dict) -> Path:
    """The fit of a report into a rig file, as `showkit measure analyse --update-rig` writes it;
    returns the backup's path."""
    from showkit.rigwrite import write_fit as write

    return write(path, report)
