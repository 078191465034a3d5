"""The show book: a PDF that opens, has its pages and says what `showkit check` says.

Read back with pypdf's text extractor (an independent PDF reader): every
cue id, gain and ceiling as the check computes them, the cautions of
showkit.safety, and the stale and over cues marked.
"""

from __future__ import annotations

import re

import pytest

from showkit.cli.main import main


def _flat(text: str) -> str:
    return re.sub(r"\s+", " ", text)


@pytest.fixture(scope="module")
def book(tmp_path_factory):
    from export_support import exported_short_sheet

    sheet, out, folder = exported_short_sheet(tmp_path_factory, "book", "show.pdf", "--png", "{folder}/png")
    return sheet, out, folder


def test_book_pages_and_text(book):
    from pypdf import PdfReader

    from showkit.safety import CAUTIONS
    from showkit.show.lock import check_sheet
    from showkit.show.sheet import load_sheet

    sheet_path, out, _ = book
    reader = PdfReader(str(out))
    # cover, running order, 4 cues, modes table, one page of mode shapes (22 readable modes)
    assert len(reader.pages) == 8
    pages = [_flat(p.extract_text()) for p in reader.pages]
    whole = " ".join(pages)
    sheet = load_sheet(sheet_path)
    checks = {c.id: c for c in check_sheet(sheet)}
    order = pages[1]
    for cue in sheet.cues:
        assert cue.id in order
        assert f"{cue.gain_db:+.2f}" in order
        c = checks[cue.id]
        if c.ceiling_db is not None:
            assert f"{c.ceiling_db:+.2f}" in order
            assert f"{c.headroom_db:+.2f}" in order
    for caution in CAUTIONS:
        assert _flat(caution) in pages[0]
    assert "local authority having jurisdiction" in pages[0]
    assert "Demo bench tube" in pages[0] and "20.00 Pa" in pages[0]
    assert sheet.cue("hum").lock is not None
    # the cover names the rig's own calibration and drive model (DriveCalibration.describe)
    from showkit.show.lock import sheet_rig

    drive = sheet_rig(sheet).drive
    assert f"calibration {drive.reference_pressure_pa:g} Pa at the cap for {drive.reference_frequency_hz:g} Hz" \
        in _flat(pages[0])
    assert _flat(drive.describe()) in _flat(pages[0])
    assert "The tube" in whole and "readable" in whole


def test_stale_and_over_cues_are_marked(book):
    from pypdf import PdfReader

    _, out, _ = book
    pages = [_flat(p.extract_text()) for p in PdfReader(str(out)).pages]
    assert "ATTENTION: 2 cues cannot be played" in pages[0]
    assert "loud (OVER)" in pages[0] and "changed (STALE)" in pages[0]
    order = pages[1]
    assert order.count("NOT PLAYABLE") == 2
    assert "OVER - NOT PLAYABLE" in order and "STALE - NOT PLAYABLE" in order
    # each cue's own page says it too; the ok cues' pages do not
    by_id = {cid: next(p for p in pages[2:6] if f": {cid}" in p) for cid in ("hum", "notes", "loud", "changed")}
    assert "OVER - NOT PLAYABLE" in by_id["loud"]
    assert "STALE - NOT PLAYABLE" in by_id["changed"]
    assert "NOT PLAYABLE" not in by_id["hum"] and "NOT PLAYABLE" not in by_id["notes"]
    # the ok cues show their most demanding moment: the lock's worst hole
    assert re.search(r"hole \d+ of 80 at 0:0\d\.\d into the cue", by_id["hum"])


def test_page_sizes_and_pngs(book, tmp_path):
    from pypdf import PdfReader

    from showkit.export.common import png_size

    sheet, out, folder = book
    reader = PdfReader(str(out))
    # A4 is 210 x 297 mm = 595.3 x 841.9 pt (ISO 216; 72 pt per inch); the running order is landscape
    w, h = float(reader.pages[0].mediabox.width), float(reader.pages[0].mediabox.height)
    assert (round(w, 1), round(h, 1)) == (595.3, 841.9)
    w, h = float(reader.pages[1].mediabox.width), float(reader.pages[1].mediabox.height)
    assert (round(w, 1), round(h, 1)) == (841.9, 595.3)
    pngs = sorted((folder / "png").glob("*.png"))
    assert len(pngs) == 8
    # 110 dpi: an A4 portrait page is 910 x 1286 px (8.27 x 11.69 in)
    assert png_size(pngs[0]) == (909, 1286) or png_size(pngs[0]) == (910, 1286)
    assert all(p.stat().st_size > 5000 for p in pngs)
    # US Letter is 8.5 x 11 in = 612 x 792 pt
    letter = tmp_path / "letter.pdf"
    assert main(["book", str(sheet), "-o", str(letter), "--paper", "letter"]) == 0
    first = PdfReader(str(letter)).pages[0]
    assert (round(float(first.mediabox.width)), round(float(first.mediabox.height))) == (612, 792)


def test_book_errors_are_one_line(tmp_path, capsys):
    assert main(["book", str(tmp_path / "missing.toml"), "-o", str(tmp_path / "b.pdf")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and err[0].startswith("showkit:")
    assert not (tmp_path / "b.pdf").exists()


def test_cue_page_flames_are_the_models_at_the_locked_worst_moment(book):
    """The row drawn for an ok cue is the flame model's frame of the rendered cue at the moment
    its lock names (the same functions as `showkit render` and `showkit lock`)."""
    import numpy as np

    from showkit.analysis.pressure import frame_lag, signal_flames
    from showkit.export.book import collect
    from showkit.physics.flames import FRAME_RATE_HZ
    from showkit.show.lock import sheet_rig
    from showkit.show.render import render_cue
    from showkit.show.sheet import load_sheet

    sheet = load_sheet(book[0])
    rig = sheet_rig(sheet)
    data = collect(sheet, rig, maps=False)
    hum = next(e for e in data.entries if e.cue.id == "hum")
    lock = sheet.cue("hum").lock
    v = render_cue(sheet, rig, sheet.cue("hum"))
    frames = signal_flames(rig, v.samples, v.rate_hz)
    j = int(np.floor(lock.worst_time_s * FRAME_RATE_HZ)) + frame_lag(rig)
    assert hum.worst_hole == lock.worst_hole and hum.worst_time_s == lock.worst_time_s
    np.testing.assert_array_equal(hum.height, frames.height[j])
    # stale and over cues: no row for the stale one, the over one's row draws in air somewhere
    by_id = {e.cue.id: e for e in data.entries}
    assert by_id["changed"].height is None and "stale" in by_id["changed"].flames_note
    # the over cue sits above the best estimate's air-drawing gain (export_support.over_gain_db):
    # its row is the model's frame at the cue's gain at the locked moment, and it draws air in
    from showkit.show.sources import cue_signal

    loud = sheet.cue("loud")
    sig = cue_signal(sheet, rig, loud)
    over = signal_flames(rig, sig.samples, sig.rate_hz, loud.gain_db)
    k = int(np.floor(loud.lock.worst_time_s * FRAME_RATE_HZ)) + frame_lag(rig)
    np.testing.assert_array_equal(by_id["loud"].air_in, over.air_in[k])
    np.testing.assert_array_equal(by_id["loud"].height, over.height[k])
    assert by_id["loud"].air_in is not None and by_id["loud"].air_in.max() > 0
    # a passage that starts later in its file (0.5 s): the lock's moment is from the cue's start,
    # and the row drawn is the rendered cue's frame there (it was taken 0.5 s earlier: a
    # presenter's cues starting at 11 s drew a blank row "-0:04.7 into the cue")
    notes = sheet.cue("notes")
    assert notes.source.start_s > 0
    v = render_cue(sheet, rig, notes)
    frames = signal_flames(rig, v.samples, v.rate_hz)
    j = int(np.floor(notes.lock.worst_time_s * FRAME_RATE_HZ)) + frame_lag(rig)
    assert by_id["notes"].worst_time_s == notes.lock.worst_time_s >= 0
    np.testing.assert_array_equal(by_id["notes"].height, frames.height[j])
    assert np.ptp(by_id["notes"].height) > 1e-5      # the row moves (the blank row was all 1.0)


@pytest.mark.parametrize("static, reserve, expect", [
    (None, "0.3", (None, 0.3)),            # text from the command line reaches the book as a number
    ("0.08 inH2O", None, (19.927, None)),  # 0.08 x 249.089 Pa (conventional inch of water, NIST SP 811)
])
def test_book_reads_static_and_reserve_through_the_conditions_door(book, monkeypatch, tmp_path, static,
                                                                   reserve, expect):
    """--static/--reserve are parsed and checked as check and run read them (before: --reserve 0.3
    raised a TypeError traceback)."""
    import showkit.export.book as book_mod

    seen = {}

    def fake_make_book(sheet, out, paper, png, static_pa, reserve_, **_):
        seen["args"] = (static_pa, reserve_)
        return {"pdf": str(out), "pages": 1, "png": [], "states": {}}

    monkeypatch.setattr(book_mod, "make_book", fake_make_book)
    sheet = book[0]
    argv = ["book", str(sheet), "-o", str(tmp_path / "b.pdf")]
    argv += ["--static", static] if static else []
    argv += ["--reserve", reserve] if reserve else []
    assert main(argv) == 0
    got = seen["args"]
    assert (got[0] is None) == (expect[0] is None) and (got[1] is None) == (expect[1] is None)
    if expect[0] is not None:
        assert got[0] == pytest.approx(expect[0], abs=0.001)
    if expect[1] is not None:
        assert isinstance(got[1], float) and got[1] == pytest.approx(expect[1])


@pytest.mark.parametrize("option, value", [("--reserve", "2"), ("--reserve", "nan"), ("--static", "9000 Pa")])
def test_book_refuses_conditions_outside_the_limits(book, tmp_path, capsys, option, value):
    assert main(["book", str(book[0]), "-o", str(tmp_path / "b.pdf"), option, value]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and option in err[0]
    assert not (tmp_path / "b.pdf").exists()


def test_book_reads_the_sheets_rig_once_and_makes_the_book_on_it(book, monkeypatch, tmp_path):
    """`book` read the sheet's rig twice (once for --static, once for the book): now once, and
    the book is made on that rig with today's static pressure (0.08 inH2O = 19.927 Pa,
    conventional inch of water, NIST SP 811)."""
    import showkit.export.book as book_mod

    from types import SimpleNamespace

    used = {}

    def fake_collect(sheet, rig, progress=None):  # the slow work left out: which rig it is given
        used["rig"] = rig
        return SimpleNamespace(entries=[])

    monkeypatch.setattr(book_mod, "collect", fake_collect)
    monkeypatch.setattr(book_mod, "write_book", lambda data, out, paper, png: {"pdf": str(out), "pages": 1,
                                                                               "png": []})
    from export_support import count_rig_reads

    reads = count_rig_reads(monkeypatch)
    assert main(["book", str(book[0]), "-o", str(tmp_path / "b.pdf"), "--static", "0.08 inH2O"]) == 0
    assert len(reads) == 1
    assert used["rig"].static_pa == pytest.approx(19.927, abs=0.001)
