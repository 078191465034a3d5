"""The Run view driven through Textual's Pilot, on a stand-in sound device (tests/fake_sounddevice.py).

The stand-in stream is pumped by hand, so the samples that would reach the
speaker are exactly what the engine's callback wrote, block by block.
"""

from __future__ import annotations

import asyncio
import datetime as dt
import math
import sys

import numpy as np
import pytest
from fake_sounddevice import make_sd
from ui_support import APP_SIZE, make_app, settle, sync


@pytest.fixture
def fake_sd(monkeypatch):
    sd = make_sd()  # a microphone (no output) and "Desk Speakers" (index 1, the default output)
    monkeypatch.setitem(sys.modules, "sounddevice", sd)
    return sd


async def _check(pilot, static: str | None = None, temperature: str | None = None) -> None:
    """The pre-show check through its dialog (today's readings typed in)."""
    from textual.widgets import Input

    await pilot.press("c")
    await pilot.pause()
    if static is not None:
        pilot.app.screen.query_one("#ask-static", Input).value = static
    if temperature is not None:
        pilot.app.screen.query_one("#ask-temperature", Input).value = temperature
    await pilot.press("enter")                # enter in any field confirms the dialog
    await settle(pilot)
    engine = pilot.app.query_one("RunView").engine
    if engine is not None:
        engine.stall_s = 600.0  # the stand-in stream is pumped by hand: no stall watch


def _played(sd, since: int) -> np.ndarray:
    return np.concatenate(sd.played[since:]) if len(sd.played) > since else np.zeros(0, np.float32)


@sync
async def test_low_manometer_reading_lists_the_cues_that_no_longer_fit(ui_show, tmp_path, fake_sd):
    from showkit.show.showlog import read_log
    from showkit.ui.run import RunView

    log = tmp_path / "show.jsonl"
    app = make_app(ui_show, view="run", log_path=log)
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        # ceilings at the rig file's 20 Pa, from the checks the Show view made
        rig_static = app.session.rig.static_pa
        at_rig = {cid: c.ceiling_db for cid, c in app.session.checks.items()}
        gains = {c.id: c.gain_db for c in app.session.sheet.cues}
        await _check(pilot, static="4 Pa")
        run = app.query_one(RunView)
        # physics.md: a ceiling scales exactly with the static pressure, +20 log10(ratio) dB
        today = {cid: c + 20 * math.log10(4.0 / rig_static) for cid, c in at_rig.items()}
        expected = {cid for cid, c in today.items() if gains[cid] > c + 1e-6}
        assert expected  # the reading is low enough that some cue no longer fits
        listed = {c.id for c in run.cues if not c.playable}
        assert listed == expected
        title = str(run.query_one("#run-title").render())
        assert "no longer fit" in title and all(cid in title for cid in expected)
        # such a cue cannot be started, and says why
        table = run.query_one("#run-table")
        bad = next(c.id for c in run.cues if not c.playable)
        table.move_cursor(row=[c.id for c in run.cues].index(bad))
        await pilot.press("s")
        await pilot.pause()
        assert "refused" in app._status_text and "over" in app._status_text
        assert run.engine.status().state == "idle"
    records = read_log(log)
    assert records[0]["event"] == "check" and "static 4 Pa" in records[0]["detail"]
    assert {r["cue"] for r in records if r["event"] == "check" and r["detail"].startswith("over")} == expected
    assert not [r for r in records if r["event"] == "start"]


@sync
async def test_fader_scales_the_output_refuses_unity_and_panic_works_from_anywhere(ui_show, tmp_path, fake_sd):
    from showkit.show.showlog import EVENTS, read_log
    from showkit.ui.run import RunView

    log = tmp_path / "show.jsonl"
    app = make_app(ui_show, view="run", log_path=log)
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        await _check(pilot)
        run = app.query_one(RunView)
        stream = fake_sd.streams[-1]
        assert stream.device == 1  # the default output of the stand-in
        await pilot.press("enter")
        since = len(fake_sd.played)
        stream.pump(8)
        engine = run.engine
        samples = engine.cues[0].samples
        out = _played(fake_sd, since)
        assert np.array_equal(out, samples[: out.size])  # fader at unity: the rendered cue itself
        await asyncio.sleep(0.12)             # the view polls the engine: the start goes to the log
        await pilot.press("minus", "minus", "minus")
        assert engine.fader_db == pytest.approx(-3.0)
        start = sum(map(len, fake_sd.played[since:]))
        stream.pump(12)                                  # 128 ms: the 30 ms fader ramp is over
        out = _played(fake_sd, since)[start:]
        ref = samples[start:start + out.size]
        tail = slice(out.size - 2048, out.size)
        assert np.max(np.abs(ref[tail])) > 0
        assert np.allclose(out[tail], ref[tail] * 10 ** (-3 / 20), rtol=1e-5, atol=1e-9)
        assert np.all(np.abs(out) <= np.abs(ref) + 1e-9)  # never above the rendered cue
        # back to unity, and one step above is refused with the reason
        await pilot.press("plus", "plus", "plus")
        assert engine.fader_db == pytest.approx(0.0, abs=1e-9)
        await pilot.press("plus")
        assert engine.fader_db == pytest.approx(0.0, abs=1e-9)
        assert "refused" in app._status_text and "locked gain" in app._status_text
        await pilot.press("minus")            # at -1 dB for the rest
        # the flame row follows the play position (frames predicted ahead of time)
        stream.pump(30)                       # past the 1 s fade-in of the first cue: well audible
        await asyncio.sleep(0.12)
        assert engine.cues[0].id in run.flames
        assert "predicted flames of" in run.query_one("#run-flames").caption
        # panic from the Show view, with the manometer dialog open
        await pilot.press("1", "m")
        await pilot.pause()
        assert app.screen.__class__.__name__ == "AskScreen"
        before = len(fake_sd.played)
        rate = engine.rate_hz
        await pilot.press("ctrl+c")
        stream.pump(math.ceil(0.1 * rate / stream.blocksize))
        after = _played(fake_sd, before)
        limit = int(0.05 * rate)              # issue 7: silence within 50 ms of samples
        assert np.max(np.abs(after[:64])) > 0  # it was playing when the key was pressed
        assert np.all(after[limit:] == 0.0)
        assert engine.status().state == "panic"
        assert "PANIC" in app._status_text
        await asyncio.sleep(0.15)             # the view polls the engine: the stop goes to the log
        await pilot.press("escape")
        gain = app.session.sheet.cues[0].gain_db
    records = read_log(log)
    events = [r["event"] for r in records]
    assert {"check", "start", "fader", "panic", "stop"} <= set(events)
    assert events.index("start") < events.index("fader") < events.index("panic")
    for r in records:                         # the documented line format (issue 7)
        assert set(r) == {"time", "event", "cue", "gain_db", "detail"}
        assert r["event"] in EVENTS
        assert dt.datetime.fromisoformat(r["time"]).tzinfo is not None
    start = next(r for r in records if r["event"] == "start")
    faders = [r for r in records if r["event"] == "fader"]
    assert start["gain_db"] == pytest.approx(gain)
    assert [r["gain_db"] for r in faders] == pytest.approx([gain - 1, gain - 2, gain - 3, gain - 2, gain - 1,
                                                            gain, gain - 1])
    panic = next(r for r in records if r["event"] == "panic")
    assert panic["cue"] == start["cue"]


@sync
async def test_no_output_device_gives_a_clear_message(ui_show, tmp_path, monkeypatch):
    from showkit.show.showlog import read_log
    from showkit.ui.run import RunView

    monkeypatch.setitem(sys.modules, "sounddevice", make_sd(devices=[("Mic only", 0, 48000.0, 2)]))
    log = tmp_path / "show.jsonl"
    app = make_app(ui_show, view="run", log_path=log)
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        await _check(pilot)
        run = app.query_one(RunView)
        message = str(run.query_one("#run-message").render())
        assert "no audio output device was found" in message and "connect" in message
        await pilot.press("enter")
        assert "no audio output" in app._status_text
        # the device setting says the same instead of a list
        await pilot.press("D")
        await pilot.pause()
        assert "no audio output device" in str(app.screen.query_one("#device-problem").render())
        await pilot.press("escape")
    assert any(r["event"] == "device_error" and "no audio output device" in r["detail"]
               for r in read_log(log))


@sync
async def test_device_setting_is_used_for_sound(ui_show, tmp_path, monkeypatch):
    sd = make_sd(devices=[("Desk Speakers", 2, 48000.0, 0), ("Hall Amp", 2, 48000.0, 0)], default_out=0)
    monkeypatch.setitem(sys.modules, "sounddevice", sd)
    app = make_app(ui_show, log_path=tmp_path / "show.jsonl")
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        await pilot.press("D")
        await pilot.pause()
        await pilot.press("down", "down", "enter")   # system default, Desk Speakers, Hall Amp
        await pilot.pause()
        assert app.session.device == 1
        assert "Hall Amp" in app._status_text
        await pilot.press("a")                        # audition the first cue
        await settle(pilot)
        assert sd.streams and sd.streams[-1].device == 1
        await pilot.press("ctrl+c")                   # panic silences the audition too
        assert "PANIC" in app._status_text and not app.audition.playing


def test_snapshot_run_view(ui_show, tmp_path, fake_sd, snap_compare):
    """The Run view at 100 x 30 after the pre-show check, on the stand-in device (nothing playing)."""

    async def run_before(pilot):
        await settle(pilot)
        await _check(pilot, static="15 Pa")
        pilot.app.say("snapshot")
        pilot.app.clear_notifications()
        await pilot.pause()

    assert snap_compare(make_app(ui_show, view="run", log_path=tmp_path / "show.jsonl"),
                        terminal_size=APP_SIZE, run_before=run_before)
