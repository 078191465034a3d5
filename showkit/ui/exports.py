"""The exports offered in the UI: the show book, the flame preview video and the plots.

Each runs as background work of the view (a Textual worker, :meth:`showkit.ui.jobs.JobRunner.run_job`) and calls the same
functions as `showkit book`, `showkit preview` and the commands' ``--plot``
(:mod:`showkit.export`); the status line says where the file went.  Files are
written beside the cue sheet, named after the sheet, the track or the recording.
"""

from __future__ import annotations

from pathlib import Path

from showkit.show.status import CueStatus
from showkit.units import format_count


def _beside(session, stem: str, suffix: str) -> Path:
    safe = "".join(ch if ch.isalnum() or ch in "-_." else "_" for ch in stem)
    return session.sheet.folder / f"{safe}{suffix}"


def _sheet_export(view, suffix: str) -> tuple:
    """``(output path beside the sheet, today's static Pa, reserve fraction, sheet path)``."""
    s = view.session
    out = _beside(s, s.sheet.path.stem, suffix)
    rig = s.rig
    return out, rig.static_pa, rig.reserve, s.sheet.path


def book(view) -> None:
    """The show book of the open sheet, for today's manometer reading (Show view)."""
    out, static, reserve, sheet_path = _sheet_export(view, "-book.pdf")

    def work(progress):
        from showkit.export.book import make_book

        return make_book(sheet_path, out, "a4", None, static, reserve, progress)

    def done(result):
        bad = [k for k, v in result["states"].items() if v != CueStatus.OK]
        view.say(f"show book written: {result['pdf']} ({result['pages']} pages)"
                + (f"; marked not playable: {', '.join(bad)}" if bad else ""), warn=bool(bad))

    view.run_job("export-book", work, done, f"writing the show book to {out.name}")


def sheet_preview(view) -> None:
    """The flame preview video of the whole show, true scale (Show view)."""
    out, static, reserve, sheet_path = _sheet_export(view, "-preview.mp4")

    def work(progress):
        from showkit.export.preview import sheet_timeline, write_video

        tl = sheet_timeline(sheet_path, static, reserve)
        return write_video(tl, out, progress=progress)

    def done(result):
        view.say(f"preview video written: {result['path']} ({result['duration_s']:.1f} s, true scale)"
                + (f"; {format_count(len(result['notes']), 'cue')} not played" if result["notes"] else ""),
                warn=bool(result["notes"]))

    view.run_job("export-preview", work, done, f"writing the preview video to {out.name}")


def track_preview(view) -> None:
    """The selected passage (or the whole track) at its ceiling, as a preview video (Track view)."""
    s = view.session
    if view.path is None:
        view.say("open a track first (o)")
        return
    path = Path(view.path)
    start = end = None
    if view.selection is not None:
        start, end = view.selection[0], view.selection[1]
    out = _beside(s, path.stem + ("" if start is None else f"-{start:.0f}-{end:.0f}s"), "-preview.mp4")
    rig = s.rig

    def work(progress):
        from showkit.export.preview import track_timeline, write_video

        return write_video(track_timeline(rig, path, start, end), out, progress=progress)

    def done(result):
        view.say(f"preview video written: {result['path']} ({result['duration_s']:.1f} s at the ceiling, true scale)")

    view.run_job("export-preview", work, done, f"writing the preview video to {out.name}")


def track_map(view) -> None:
    """The time x mode map with the passages and scores, as a PNG (Track view)."""
    s = view.session
    a = view.analysis
    if a is None:
        view.say("open a track first (o)")
        return
    if a.transpose:
        # the PNG draws the map of the recording (as `scan --plot`): its scores must be the recording's
        view.say("the map PNG draws the track as recorded: press 0 to go back to it, then P", warn=True)
        return
    path = Path(a.path)
    out = _beside(s, path.stem, "-map.png")
    rig = s.rig
    track = {"path": str(path), "score": a.score, "passages": a.passages, "error": None}

    def work(progress):
        from showkit.export.figures import plot_scan

        return plot_scan(rig, [track], out)

    view.run_job("export-map", work, lambda p: view.say(f"map written: {p}"), f"drawing the map to {out.name}")


def response_plot(view) -> None:
    """The measured response with the measured and fitted modes, as a PNG (Measure view)."""
    s = view.session
    m = view.measurement
    if m is None:
        view.say("nothing to draw yet: open a recording first (o)")
        return
    out = _beside(s, Path(m.recording).stem, "-response.png")

    def work(progress):
        from showkit.export.figures import plot_response

        return plot_response(m.freq_hz, m.level_db, m.report, out)

    view.run_job("export-response", work, lambda p: view.say(f"response plot written: {p}"),
                f"drawing the response to {out.name}")
