"""The Run view driven through Textual's Pilot, on a stand-in sound device (tests/fake_sounddevice.py).

The stand-in stream is pumped by hand, so the samples that would reach the
speaker are exactly what the engine's callback wrote, block by block.  The tests use
the short demo show (conftest ``ui_short_show``: the demo's five cues with a third of
the sound), since none of their checks depends on the cues' lengths; the snapshot
keeps the demo show itself.
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
async def test_low_manometer_reading_lists_the_cues_that_no_longer_fit(ui_short_show, tmp_path, fake_sd):
    from showkit.show.showlog import read_log
    from showkit.ui.run import RunView

    log = tmp_path / "show.jsonl"
    app = make_app(ui_short_show, view="run", log_path=log)
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        # ceilings at the rig file's 20 Pa, from the checks the Show view made
        rig_static = app.session.rig.static_pa
        at_rig = {cid: c.ceiling_db for cid, c in app.session.checks.items()}
        gains = {c.id: c.gain_db for c in app.session.sheet.cues}
        await _check(pilot, static="4 Pa")
        run = app.query_one(RunView)
        # DEVELOPERS.md Methods: a ceiling scales exactly with the static pressure, +20 log10(ratio) dB
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
async def test_fader_scales_the_output_refuses_unity_and_panic_works_from_anywhere(ui_short_show, tmp_path, fake_sd):
    from showkit.show.showlog import EVENTS, read_log
    from showkit.ui.run import RunView

    log = tmp_path / "show.jsonl"
    app = make_app(ui_short_show, view="run", log_path=log)
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
async def test_no_output_device_gives_a_clear_message(ui_short_show, tmp_path, monkeypatch):
    from showkit.show.showlog import read_log
    from showkit.ui.run import RunView

    monkeypatch.setitem(sys.modules, "sounddevice", make_sd(devices=[("Mic only", 0, 48000.0, 2)]))
    log = tmp_path / "show.jsonl"
    app = make_app(ui_short_show, view="run", log_path=log)
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
async def test_device_setting_is_used_for_sound(ui_short_show, tmp_path, monkeypatch):
    sd = make_sd(devices=[("Desk Speakers", 2, 48000.0, 0), ("Hall Amp", 2, 48000.0, 0)], default_out=0)
    monkeypatch.setitem(sys.modules, "sounddevice", sd)
    app = make_app(ui_short_show, log_path=tmp_path / "show.jsonl")
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


async def _manometer(pilot, reading: str) -> None:
    """Today's manometer reading through the m dialog (any view)."""
    from textual.widgets import Input

    await pilot.press("m")
    await pilot.pause()
    pilot.app.screen.query_one("#ask-static", Input).value = reading
    await pilot.press("enter")
    await pilot.pause()


@sync
async def test_manometer_change_after_the_check_blocks_the_cue_in_the_run_view(ui_short_show, tmp_path, fake_sd):
    """Issue 11: check in the Run view, then m with 2 Pa: the Run view must not say every cue
    fits, and go must not start a cue that no longer fits (nor may the show log)."""
    from showkit.show.showlog import read_log
    from showkit.ui.run import RunView

    log = tmp_path / "show.jsonl"
    app = make_app(ui_short_show, view="run", log_path=log)
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        await _check(pilot)
        run = app.query_one(RunView)
        engine = run.engine
        assert "all 5 cues fit" in str(run.query_one("#run-title").render())
        rig_static = app.session.rig.static_pa
        at_rig = {c.id: c.ceiling_db for c in run.cues}
        gains = {c.id: c.gain_db for c in run.cues}
        # DEVELOPERS.md Methods §7: a pressure-limited ceiling moves by exactly 20 log10(ratio) dB
        today = {cid: c + 20 * math.log10(2.0 / rig_static) for cid, c in at_rig.items()}
        expected = {cid for cid, c in today.items() if gains[cid] > c + 1e-6}
        assert expected and len(expected) < len(gains)
        await _manometer(pilot, "2 Pa")
        # at once, before the check is back: the cues that may no longer fit are held back
        ids = [c.id for c in engine.cues]
        assert {ids[k] for k in range(len(ids)) if not engine.startable(k)} == expected
        await settle(pilot)
        assert run.engine is engine                       # the same engine, the same device
        title = str(run.query_one("#run-title").render())
        assert "all 5 cues fit" not in title and "no longer fit" in title
        assert "static 2.00 Pa" in title
        assert {c.id for c in run.cues if not c.playable} == expected
        assert {ids[k] for k in range(len(ids)) if not engine.startable(k)} == expected
        # every view tells the same story: the Show view marks the same cues over
        assert {cid for cid, c in app.session.checks.items() if c.status == "over"} == expected
        for c in run.cues:
            assert c.ceiling_db == pytest.approx(app.session.checks[c.id].ceiling_db, abs=1e-9)
        # the cue list says why, row by row
        table = run.query_one("#run-table")
        for cid in expected:
            row = [str(v) for v in table.get_row(cid)]
            assert row[5] == "OVER" and "above today's ceiling" in row[7]
        # and the status line says why when such a cue is asked for
        bad = sorted(expected, key=ids.index)[0]
        run.query_one("#run-table").move_cursor(row=ids.index(bad))
        await pilot.press("s")
        assert "refused" in app._status_text and "over" in app._status_text
        # go passes over them: it starts only a cue that fits
        await pilot.press("enter")
        await pilot.pause()
        started = engine.status().cue_id or engine.cues[engine.mixer.requested].id
        assert started not in expected
        await asyncio.sleep(0.12)
        await pilot.press("escape")                       # Esc: panic
        assert engine.status().state == "panic"
    records = read_log(log)
    assert not [r for r in records if r["event"] == "start" and r["cue"] in expected]
    assert any(r["event"] == "check" and "static 2 Pa" in r["detail"] for r in records)
    assert {r["cue"] for r in records if r["event"] == "check" and r["detail"].startswith("withdrawn")} == expected
    assert any(r["event"] == "panic" for r in records)


@sync
async def test_a_cue_playing_when_the_ceiling_comes_down_is_brought_down_and_held(ui_short_show, tmp_path, fake_sd):
    from showkit.show.showlog import read_log
    from showkit.ui.run import RunView

    log = tmp_path / "show.jsonl"
    app = make_app(ui_short_show, view="run", log_path=log)
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        await _check(pilot)
        run = app.query_one(RunView)
        engine, stream = run.engine, fake_sd.streams[-1]
        first = run.cues[0]
        # a reading that takes the first cue's ceiling to 3 dB below its gain (exact scaling,
        # DEVELOPERS.md Methods §7); within the plausible range of the one door
        static = app.session.rig.static_pa * 10 ** ((first.gain_db - 3.0 - first.ceiling_db) / 20)
        assert 1.0 <= static < app.session.rig.static_pa
        await pilot.press("enter")
        stream.pump(40)                                   # past its 1 s fade-in
        await _manometer(pilot, f"{static:.4f} Pa")
        assert engine.fader_db == pytest.approx(-3.0, abs=0.01)
        since = len(fake_sd.played)
        stream.pump(12)                                   # the 30 ms fader ramp is over
        out = _played(fake_sd, since)[-2048:]
        pos = engine.status().elapsed_s
        end = int(round(pos * engine.rate_hz))
        ref = engine.cues[0].samples[end - out.size:end]
        assert np.max(np.abs(ref)) > 0
        assert np.allclose(out, ref * 10 ** (-3 / 20), rtol=1e-4, atol=1e-7)
        await pilot.press("plus")                         # held: it cannot come back up
        assert engine.fader_db == pytest.approx(-3.0, abs=0.01)
        from showkit.show.engine import FaderRefused

        with pytest.raises(FaderRefused, match="held"):
            engine.fader_step(1.0)
        await settle(pilot)
        assert not engine.startable(0)
        await pilot.press("f")
        stream.pump(int(4 * engine.rate_hz / stream.blocksize))
        await asyncio.sleep(0.15)                         # the view hands over the new check
        assert run.cues[0].status == "over" and engine.cues[0].status == "over"
    records = read_log(log)
    assert any(r["event"] == "fader" and "lowered the ceiling" in r["detail"] for r in records)


@sync
async def test_gas_temperature_moves_tones_and_stales_nothing_even_after_a_restart(ui_short_show, tmp_path, fake_sd):
    from textual.widgets import Input

    from showkit.physics.modes import find_modes
    from showkit.show.preshow import cue_for_today
    from showkit.ui.run import RunView

    app = make_app(ui_short_show, view="run", log_path=tmp_path / "show.jsonl")
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        await _check(pilot)
        before = {cid: c.ceiling_db for cid, c in app.session.checks.items()}
        await pilot.press("2", "d")                       # the Tube view's gas temperature
        await pilot.pause()
        app.screen.query_one("#ask-temperature", Input).value = "35 C"
        await pilot.press("enter")
        await settle(pilot)
        s = app.session
        assert s.rig.temperature_k == pytest.approx(308.15)
        checks = s.checks
        assert not [c for c in checks.values() if c.status == "stale"], checks
        assert checks["talk"].status == "ok" and checks["steps"].status in ("ok", "over")
        # the tone cue follows mode 4 to today's frequency (modes move with the gas)
        mode4 = next(m for m in find_modes(s.rig.model) if m.n == 4)
        cue, _ = cue_for_today(s.sheet, s.base_rig(), s.rig, s.sheet.cue("mode-4"))
        assert cue.lock.frequency_hz == pytest.approx(mode4.frequency_hz, rel=1e-9)
        assert checks["mode-4"].ceiling_db != pytest.approx(before["mode-4"], abs=1e-6)
        # the Run view checked again for today's gas, and agrees with the Show view
        run = app.query_one(RunView)
        assert "gas 35.0 °C" in str(run.query_one("#run-title").render())
        for c in run.cues:
            assert c.status == checks[c.id].status
        # re-locking at 35 C writes locks for the rig file's gas: valid after a restart
        await pilot.press("1", "L")
        await settle(pilot)
        await pilot.press("ctrl+q")
    app = make_app(ui_short_show)
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        assert app.session.temperature_k is None
        assert {c.status for c in app.session.checks.values()} <= {"ok", "over"}


@sync
async def test_a_rig_written_by_the_measure_view_holds_every_cue_until_checked_again(ui_short_show, tmp_path, fake_sd):
    from showkit.show.showlog import read_log
    from showkit.ui.run import RunView

    log = tmp_path / "show.jsonl"
    app = make_app(ui_short_show, view="run", log_path=log)
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        await _check(pilot)
        run = app.query_one(RunView)
        engine = run.engine
        playable = [k for k, c in enumerate(run.cues) if c.playable]
        run.rig_changed()                                 # what the Measure view's W calls
        assert not any(engine.startable(k) for k in range(len(engine.cues)))
        await pilot.press("enter")
        assert "refused" in app._status_text or engine.status().state == "idle"
        assert engine.status().cue_id is None
        await settle(pilot)
        assert [k for k in range(len(engine.cues)) if engine.startable(k)] == playable
    records = read_log(log)
    assert not [r for r in records if r["event"] == "start"]
    assert sum(r["detail"].startswith("withdrawn: the rig file changed") for r in records) == len(playable)


@sync
async def test_a_gain_lowered_in_the_show_view_is_followed_by_the_run_view(ui_short_show, tmp_path, fake_sd):
    from showkit.ui.run import RunView

    app = make_app(ui_short_show, view="run", log_path=tmp_path / "show.jsonl")
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        await _check(pilot)
        run = app.query_one(RunView)
        engine = run.engine
        old = run.cues[0].gain_db
        await pilot.press("1", "minus", "4")              # welcome 0.5 dB down, back to the Run view
        await asyncio.sleep(0.12)                         # one poll of the view
        await settle(pilot)
        assert run.engine is engine and engine.startable(0)
        assert run.cues[0].gain_db == pytest.approx(old - 0.5)
        assert engine.cues[0].gain_db == pytest.approx(old - 0.5)
    from showkit.show.showlog import read_log

    records = read_log(tmp_path / "show.jsonl")
    # held back at once (it is quieter now), before the check came back with the new gain
    held = next(k for k, r in enumerate(records) if r["detail"].startswith("withdrawn: the cue changed"))
    assert records[held]["cue"] == "welcome"
    assert any(r["event"] == "check" and r["cue"] == "welcome" and r["gain_db"] == pytest.approx(old - 0.5)
               for r in records[held:])


@sync
async def test_a_job_step_after_the_screen_is_gone_is_ignored(ui_short_show, fake_sd):
    # a worker's progress message can arrive while the app closes (seen once in CI: NoMatches on
    # '#progress' at teardown); the bookkeeping goes on and nothing raises
    app = make_app(ui_short_show, view="run")
    async with app.run_test(size=APP_SIZE) as pilot:
        await settle(pilot)
        await app.query_one("#progress").remove()
        worker = object()
        app._job(worker, 1, 4)
        assert app._jobs[worker] == (1, 4)
        app._job(worker, end=True)
        assert worker not in app._jobs
