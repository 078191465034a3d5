"""Issue 11 item 2: behind the doors, the ceiling computation itself fails closed.

A NaN, infinite or degenerate number that reaches the rule or the simulation (here
put there directly, past the checks of the rig file) is an error, never the
full-scale limit.  Before, a NaN swing made ``combine`` pick full scale: +4.75 dB
where the sane rig gave -21.27 dB.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest

from showkit.analysis import pressure
from showkit.errors import RigError
from showkit.physics import ceiling as rule
from showkit.physics.drive import DriveCalibration
from showkit.physics.response import design_hole_filters
from showkit.rigfile import load_rig


@pytest.mark.parametrize("swing", [math.nan, math.inf, -1.0])
def test_the_rule_refuses_a_bad_swing(swing):
    with pytest.raises(ValueError):
        rule.pressure_ceiling_db(swing, 20.0, 0.25)


@pytest.mark.parametrize("static,reserve", [(math.nan, 0.25), (0.0, 0.25), (-20.0, 0.25), (math.inf, 0.25),
                                            (20.0, 1.0), (20.0, math.nan), (20.0, -0.1)])
def test_the_rule_and_rescaling_refuse_bad_conditions(static, reserve):
    with pytest.raises(ValueError):
        rule.pressure_ceiling_db(1.0, static, reserve)
    c = rule.combine(-20.0, 3.0)
    with pytest.raises(ValueError):
        rule.rescale(c, static, 20.0, reserve, 0.25)
    with pytest.raises(ValueError):
        rule.rescale(c, 20.0, static, 0.25, reserve)


def test_combine_never_falls_to_full_scale_on_nan():
    for bad in (math.nan, -math.inf):
        with pytest.raises(ValueError):
            rule.combine(bad, 4.75)
        with pytest.raises(ValueError):
            rule.combine(-21.27, bad)
    with pytest.raises(ValueError):
        rule.full_scale_db(math.nan)
    # silence (a zero swing, a zero peak) is the one case with no limit: the +60 dB cap
    assert rule.combine(rule.pressure_ceiling_db(0.0, 20.0, 0.25), rule.full_scale_db(0.0)).ceiling_db == 60.0


@pytest.mark.parametrize("drive", [DriveCalibration(reference_level_dbfs=math.nan),
                                   DriveCalibration(reference_pressure_pa=math.inf),
                                   DriveCalibration(reference_pressure_pa=0.0),
                                   DriveCalibration(response_freq_hz=(50.0, 100.0),
                                                    response_db=(math.nan, math.nan))])
def test_a_degenerate_calibration_is_an_error_not_a_ceiling(drive):
    rig = replace(load_rig(), drive=drive)  # past the rig file's door, on purpose
    with pytest.raises(ValueError):
        design_hole_filters(rig.model, rig.drive)
    t = np.arange(4800) / 48000
    with pytest.raises(RigError):
        pressure.signal_report(rig, 0.5 * np.sin(2 * np.pi * 200 * t), 48000, flames=False)
