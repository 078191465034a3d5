"""Property: whatever the sheet says, a rendered cue never takes a hole below the safe line (issue 5)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from showkit.analysis.pressure import hole_filters
from showkit.physics.response import pressure_signal
from showkit.rigfile import load_rig
from showkit.show.lock import lock_sheet
from showkit.show.render import VERIFY_TOLERANCE, render_cue
from showkit.show.sheet import Cue, GlideSource, Sheet, ToneSource

RIG = load_rig()
MODES = (1, 2, 3, 4, 5, 6, 7, 8)

tones = st.builds(lambda mode, duration: ToneSource(duration, mode=mode),
                  st.sampled_from(MODES), st.floats(0.5, 2.0))
glides = st.builds(lambda a, b, duration: GlideSource(duration, from_mode=a, to_mode=b),
                   st.sampled_from(MODES), st.sampled_from(MODES), st.floats(0.5, 2.0))
cues = st.builds(
    lambda source, gain, fin, fout: Cue(id="x", source=source, gain_db=gain, fade_in_s=fin, fade_out_s=fout),
    st.one_of(tones, glides), st.floats(-60.0, 20.0), st.floats(0.0, 0.2), st.floats(0.0, 0.2))


@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(cue=cues, static_pa=st.floats(5.0, 60.0), reserve=st.floats(0.0, 0.6))
def test_rendered_cues_hold_the_line_and_gains_never_exceed_ceilings(cue, static_pa, reserve):
    rig = RIG.with_conditions(static_pa=static_pa, reserve=reserve)
    sheet = Sheet(title="p", rig="demo", cues=[cue])
    lock_sheet(sheet, rig)
    locked = sheet.cues[0]
    assert locked.gain_db <= locked.lock.ceiling_db  # after lock, never above the ceiling
    rendered = render_cue(sheet, rig, locked)
    filters = hole_filters(rig)
    import soxr

    x = soxr.resample(rendered.samples.astype(float), rendered.rate_hz, filters.rate_hz, quality="VHQ")
    pressure = pressure_signal(filters, x).real  # direct convolution, independent of the block pass
    lowest = static_pa + pressure.min()
    assert lowest >= reserve * static_pa - 1e-3 * static_pa
    assert np.max(np.abs(rendered.samples)) <= 1.0 + VERIFY_TOLERANCE


@pytest.mark.parametrize("static_pa", [10.0, 40.0])
def test_a_gain_one_step_above_the_ceiling_is_refused(static_pa):
    rig = RIG.with_conditions(static_pa=static_pa)
    sheet = Sheet(title="p", rig="demo", cues=[Cue(id="t", source=ToneSource(1.5, mode=3), gain_db=-80.0,
                                                    fade_in_s=0.2, fade_out_s=0.2)])
    lock_sheet(sheet, rig)
    from dataclasses import replace

    from showkit.errors import SheetError

    over = replace(sheet.cues[0], gain_db=sheet.cues[0].lock.ceiling_db + 0.1)
    with pytest.raises(SheetError, match="over"):
        render_cue(sheet, rig, over)
