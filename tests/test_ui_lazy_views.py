"""Each view is built when it is first shown: the app starts with one, and a view built
later shows the state of the session as it is then (here: a new manometer reading)."""

from __future__ import annotations

import math

from ui_support import APP_SIZE, make_app, settle, sync


@sync
async def test_only_the_first_view_is_built_and_a_later_one_shows_todays_reading(ui_short_show):
    from textual import events

    from showkit.ui.run import RunView
    from showkit.ui.show import ShowView
    from showkit.ui.tube import ModeTable, TubeView

    app = make_app(ui_short_show)
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        # at start: the Show view only (no other view in the DOM)
        assert [w.id for w in app.query_one("#views").children] == ["show"]
        assert len(app.query(ShowView)) == 1
        assert not app.query(TubeView) and not app.query(RunView)
        assert app.view("tube") is None
        rig_static = app.session.rig.static_pa
        # the manometer (m): 7 Pa, typed and entered as one burst
        await pilot.press("m")
        for ch in "7 Pa":
            app.post_message(events.Key({" ": "space"}.get(ch, ch), ch))
        app.post_message(events.Key("enter", "\r"))
        await pilot.pause()
        await settle(pilot)
        assert math.isclose(app.session.rig.static_pa, 7.0), app._status_text
        assert rig_static != 7.0  # a change, not the rig file's own value
        assert app.view("tube") is None  # the change did not build the view
        # the Tube view, first shown now, is built with today's reading and the modes
        await pilot.press("2")
        await settle(pilot)
        tube = app.view("tube")
        assert tube is not None and app.query_one("#views").current == "tube"
        assert app.focused is app.query_one(ModeTable)
        facts = str(tube.query_one("#rig-facts").render())
        assert "static 7.0 Pa" in facts and "today's reading" in facts, facts
        table = tube.query_one(ModeTable)
        modes = app.session.modes
        assert modes and table.row_count == len(modes)
        assert [str(c) for c in table.get_row_at(0)][1] == f"{modes[0].frequency_hz:.2f}"
        # the selected mode's flame row was predicted at today's reading (7 Pa)
        assert any(key[2] == 7.0 for key in app.session._mode_flames), list(app.session._mode_flames)
        # the other views are still not built
        assert app.view("run") is None and app.view("measure") is None and app.view("track") is None
