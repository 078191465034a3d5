"""The Measure view driven through Textual's Pilot: a synthetic recording of the sweep through a
known tube is analysed, drawn and tabled, and the fit is written into a copy of the rig."""

from __future__ import annotations

import shutil

import numpy as np
import pytest
from measure_support import FS, tube_recording
from ui_support import APP_SIZE, make_app, settle, sync

SPEED_SCALE = 1.01


def synthetic_recording(folder):
    """The sweep played through a known tube: the demo tube model with a 1 % faster gas.

    As in tests/test_measure.py: the response of
    :func:`showkit.analysis.tubefit.variant` (sound speed x 1.01, end correction
    1.6, resistance 3e5 Pa s/m3) times the demo speaker shape, a 0.3 s delay and
    a little noise.  Returns (recording path, sweep path, the true model).
    """
    import soundfile as sf

    from showkit.rigfile import load_rig

    rec, x, true = tube_recording(load_rig(), SPEED_SCALE, 500.0, 3.0)
    sf.write(folder / "rec.wav", rec, FS, subtype="FLOAT")
    sf.write(folder / "sweep.wav", x, FS, subtype="FLOAT")
    return folder / "rec.wav", folder / "sweep.wav", true


@pytest.fixture
def own_rig_show(ui_short_show):
    """The demo show on a copy of the demo rig (a rig file that may be written)."""
    from showkit.rigfile import demo_rig_path

    rig = ui_short_show.parent / "my-rig.toml"
    shutil.copy(demo_rig_path(), rig)
    text = ui_short_show.read_text(encoding="utf-8").replace('rig = "demo"', 'rig = "my-rig.toml"', 1)
    assert 'rig = "my-rig.toml"' in text
    ui_short_show.write_text(text, encoding="utf-8")
    return ui_short_show, rig


async def _open(pilot, rec, sweep) -> None:
    from textual.widgets import Input

    await pilot.press("o")
    await pilot.pause()
    pilot.app.screen.query_one("#ask-recording", Input).value = str(rec)
    pilot.app.screen.query_one("#ask-sweep", Input).value = str(sweep)
    await pilot.press("enter", "enter")
    await settle(pilot)


@sync
async def test_measurement_shows_modes_drawing_and_writes_the_rig_with_a_backup(own_rig_show, tmp_path):
    from showkit.rigfile import demo_rig_path, load_rig
    from showkit.ui.measure import MEASURED_MARK, MODEL_MARK, MeasureView, log_columns

    sheet, rig_path = own_rig_show
    rec, sweep, _ = synthetic_recording(tmp_path)
    app = make_app(sheet, view="measure")
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        old_modes = [m.frequency_hz for m in app.session.modes]
        await _open(pilot, rec, sweep)
        view = app.query_one(MeasureView)
        m = view.measurement
        assert m is not None, app._status_text
        report = m.report
        # the table: one row per measured mode, measured and fitted Hz and the cents between them
        table = view.query_one("#measure-table")
        assert table.row_count == len(report["modes"]) >= 4
        for k, mode in enumerate(report["modes"]):
            row = [str(c) for c in table.get_row_at(k)]
            assert float(row[1]) == pytest.approx(mode["frequency_hz"], abs=0.006)
            assert float(row[3]) == pytest.approx(report["fit"]["model_hz"][k], abs=0.006)
        # the fitted sound speed is the 1 % faster gas, within 0.3 % (issue 8)
        fit = report["fit"]
        assert fit["sound_speed_m_s"] / (fit["rig_sound_speed_m_s"] * SPEED_SCALE) == pytest.approx(1, abs=0.003)
        assert f"{fit['sound_speed_m_s']:.2f} m/s" in str(view.query_one("#measure-fit").render())
        # the drawing: a bar per column, the measured modes marked on their columns
        drawing = view.query_one("#response-drawing")
        lines = drawing.render().plain.split("\n")
        width = drawing.size.width
        marks = next(line for line in lines[1:] if MEASURED_MARK in line)
        f = np.asarray(m.freq_hz)
        good = np.isfinite(m.level_db)
        cols = log_columns([x["frequency_hz"] for x in report["modes"]], float(f[good].min()),
                           float(f[good].max()), width)[0]
        assert {i for i, ch in enumerate(marks) if ch == MEASURED_MARK} == {int(c) for c in cols}
        assert any(MODEL_MARK in line for line in lines)
        assert any(ch in "▁▂▃▄▅▆▇█" for line in lines[1:8] for ch in line)
        assert "CAUTION" in str(view.query_one("#measure-caution").render())
        # write the fit into the rig copy: a backup of the previous file is kept
        before_text = rig_path.read_text(encoding="utf-8")
        # the Tube view's flame preview is not part of this test: the Tube view is never built
        # here (on a rig it has not seen the pressure model takes ~20 s for its first flame row)
        assert app.view("tube") is None
        await pilot.press("W")
        await settle(pilot)
        assert "wrote the fit into my-rig.toml" in str(view.query_one("#measure-title").render())
        assert (rig_path.parent / "my-rig.toml.bak").read_text(encoding="utf-8") == before_text
        # issue 13: the faster gas moved a mode next to the calibration frequency: the fit is kept
        # and the view says to calibrate again (no levels rest on a calibration that could mislead)
        assert "calibrate again" in app._status_text
        new = load_rig(rig_path, check_calibration=False)
        assert new.measured["modes"] and new.loss_family.measured
        assert new.gas.sound_speed_m_s / (load_rig(demo_rig_path()).gas.sound_speed_m_s * SPEED_SCALE) == \
            pytest.approx(1, abs=0.003)
        # the measured tube's modes moved up with the faster gas
        from showkit.physics.modes import find_modes
        assert find_modes(new.model, 400)[3].frequency_hz / old_modes[3] > 1.005


@sync
async def test_demo_rig_is_never_written_and_bad_files_get_a_clear_message(ui_short_show, tmp_path):
    from showkit.rigfile import demo_rig_path
    from showkit.ui.measure import Measurement, MeasureView

    demo_text = demo_rig_path().read_text(encoding="utf-8")
    (tmp_path / "noise.wav").write_bytes(b"not a sound file")
    app = make_app(ui_short_show, view="measure")
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        view = app.query_one(MeasureView)
        await _open(pilot, tmp_path / "missing.wav", tmp_path / "noise.wav")
        assert "no such recording file" in app._status_text
        # a relative name found in neither folder: both named (the show's folder alone was named,
        # while an existing relative file was read from the current folder: a fresh user's report)
        await _open(pilot, "nowhere-at-all.wav", tmp_path / "noise.wav")
        assert "no such recording in the current folder" in app._status_text
        assert "the show's folder" in app._status_text
        (tmp_path / "missing.wav").write_bytes(b"RIFF....")
        await _open(pilot, tmp_path / "missing.wav", tmp_path / "noise.wav")
        assert "cannot read the recording" in app._status_text
        assert view.measurement is None
        await pilot.press("W")
        assert "nothing to write yet" in app._status_text
        # the refusal comes before the report is used: any measurement will do
        view.measurement = Measurement(tmp_path / "rec.wav", tmp_path / "sweep.wav", [], [], {}, "demo")
        await pilot.press("W")
        await pilot.pause()
        assert "demo rig is never changed" in app._status_text
    assert demo_rig_path().read_text(encoding="utf-8") == demo_text


def test_snapshot_measure_view(ui_show, tmp_path_factory, snap_compare):
    """The Measure view at 100 x 30 with a synthetic measurement shown (file names fixed, not tmp)."""
    from showkit.rigfile import load_rig
    from showkit.ui.measure import MeasureView
    from showkit.ui.measuring import measure_files

    folder = tmp_path_factory.mktemp("snap-measure")
    rec, sweep, _ = synthetic_recording(folder)
    m = measure_files(load_rig(), rec, sweep)

    async def run_before(pilot):
        await settle(pilot)
        pilot.app.query_one(MeasureView).show_measurement(m)
        await settle(pilot)  # the view's status line and its warning (messages), then the fixed line
        pilot.app.say("snapshot")
        await pilot.pause()

    assert snap_compare(make_app(ui_show, view="measure"), terminal_size=APP_SIZE, run_before=run_before)
