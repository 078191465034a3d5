"""SVG snapshots of each view on the demo show at 100 x 30 (pytest-textual-snapshot).

Deterministic: a locked copy of the demo show, fixed tmp-independent names,
every worker finished before the picture, and a fixed status line.
Make the baselines with ``python -m pytest tests/test_ui_snapshots.py --snapshot-update``.
"""

from __future__ import annotations

from ui_support import APP_SIZE, make_app, settle


def _before(*keys):
    async def run_before(pilot):
        await settle(pilot)
        for key in keys:
            await pilot.press(key)
            await settle(pilot)
        pilot.app.say("snapshot")
        pilot.app.clear_notifications()
        await pilot.pause()

    return run_before


def test_snapshot_show_view(ui_show, snap_compare):
    assert snap_compare(make_app(ui_show), terminal_size=APP_SIZE, run_before=_before("down", "down"))


def test_snapshot_tube_view(ui_show, snap_compare):
    assert snap_compare(make_app(ui_show, view="tube"), terminal_size=APP_SIZE,
                        run_before=_before("down", "down", "down"))


def test_snapshot_track_view(ui_show, snap_compare):
    from showkit.demo_files import demo_audio_path

    app = make_app(ui_show, track=demo_audio_path("three_rooms.flac"), view="track")
    assert snap_compare(app, terminal_size=APP_SIZE, run_before=_before("right", "right", "right", "right"))


def test_snapshot_first_start_cautions(ui_show, snap_compare):
    assert snap_compare(make_app(ui_show, cautions=True), terminal_size=APP_SIZE, run_before=_before())
