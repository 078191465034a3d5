"""The exports from the UI: one key each in the Show, Track and Measure views, named in the
help, run in the background, and the status line says where the file went."""

from __future__ import annotations

from ui_support import APP_SIZE, make_app, mark_cautions_read, set_folders, settle, sync


@sync
async def test_help_names_the_export_keys(ui_short_show):
    from showkit.ui.help import HelpScreen

    app = make_app(ui_short_show)
    async with app.run_test(size=APP_SIZE) as pilot:
        await pilot.press("question_mark")
        await pilot.pause()
        assert isinstance(app.screen, HelpScreen)
        sections = {str(w.render()).splitlines()[0]: str(w.render()) for w in app.screen.query(".help-section")}
        assert "show book PDF" in sections["Show view (1)"] and "preview video" in sections["Show view (1)"]
        assert "preview video" in sections["Track view (3)"] and "map PNG" in sections["Track view (3)"]
        assert "response PNG" in sections["Measure view (5)"]


@sync
async def test_show_view_writes_the_book_and_the_preview(tmp_path, monkeypatch, ui_cache):
    from export_support import short_sheet

    set_folders(monkeypatch, tmp_path, ui_cache)
    mark_cautions_read()
    sheet = short_sheet(tmp_path)
    app = make_app(sheet)
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        await pilot.press("B")
        await settle(pilot)
        book = tmp_path / "short-book.pdf"
        assert book.is_file() and book.stat().st_size > 10000
        assert str(book) in app._status_text and "loud" in app._status_text  # the over cue is named
        await pilot.press("V")
        await settle(pilot)
        video = tmp_path / "short-preview.mp4"
        assert video.is_file() and video.stat().st_size > 1000
        assert str(video) in app._status_text and "not played" in app._status_text


@sync
async def test_track_and_measure_keys_say_what_is_missing(ui_short_show):
    app = make_app(ui_short_show)
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        await pilot.press("3", "V")
        assert "open a track first" in app._status_text
        await pilot.press("P")
        assert "open a track first" in app._status_text
        await pilot.press("5", "P")
        assert "open a recording first" in app._status_text
