"""The playback engine, driven directly through its callback with no device.

Expected values follow from the engine's contract (output = rendered samples
times a gain in [0, 1]; panic silent within 50 ms; then = "next" gapless);
they are not taken from any outside source.
"""

from __future__ import annotations

import math
import tracemalloc

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from fake_sounddevice import Flags, make_sd
from showkit.show import devices
from showkit.show.engine import CueRefused, Engine, FaderRefused
from showkit.show.playlist import RenderedCue, resample_cue
from showkit.show.showlog import ShowLog, read_log

RATE = 48000


def sine(freq_hz, seconds, amp=0.5, rate=RATE, phase=0.0):
    t = np.arange(int(round(seconds * rate))) / rate
    return (amp * np.sin(2 * np.pi * freq_hz * t + phase)).astype(np.float32)


def cue(cid, samples, then="wait", status="ok", rate=RATE, gain_db=-10.0):
    return RenderedCue(cid, f"label {cid}", samples, rate, then=then, gain_db=gain_db,
                       ceiling_db=-5.0, status=status, message="" if status == "ok" else "test")


def play(engine, frames, blocks=(512,)):
    """Drive the callback for ``frames`` frames in blocks cycling through ``blocks``."""
    out = np.full((frames, 1), np.nan, np.float32)
    pos, k = 0, 0
    while pos < frames:
        n = min(blocks[k % len(blocks)], frames - pos)
        engine.render_into(out[pos:pos + n], n)
        pos += n
        k += 1
    return out[:, 0]


def test_output_equals_cue_times_fader():
    a = cue("a", sine(440, 0.25))
    engine = Engine([a])
    engine.set_fader(0.5)
    engine.go()
    out = play(engine, a.frames + 1000, blocks=(300, 4096, 77))
    # rendered samples times the fader, exactly (float32 product), then silence
    assert np.array_equal(out[:a.frames], a.samples * np.float32(0.5))
    assert np.all(out[a.frames:] == 0.0)


def test_fader_move_mid_cue_is_ramped_and_settles_on_cue_times_fader():
    a = cue("a", sine(300, 0.5, amp=0.8))
    engine = Engine([a], fader_slew_s=0.03)
    engine.go()
    first = play(engine, 4800)
    assert np.array_equal(first, a.samples[:4800])
    engine.set_fader_db(-6.0)
    rest = play(engine, a.frames - 4800)
    level = np.float32(10 ** (-6 / 20))
    ramp = int(round(0.03 * RATE))
    assert np.array_equal(rest[ramp:], a.samples[4800 + ramp:] * level)
    # during the ramp the gain moves down smoothly and never exceeds unity
    seg = a.samples[4800:4800 + ramp]
    loud = np.abs(seg) > 0.05
    gain = rest[:ramp][loud] / seg[loud]
    assert np.all(gain <= 1.0) and np.all(gain >= level - 1e-6)
    assert np.all(np.diff(gain) <= 1e-6)


def test_fader_above_unity_is_refused():
    engine = Engine([cue("a", sine(200, 0.1))])
    engine.set_fader_db(-3.0)
    with pytest.raises(FaderRefused, match="locked gain"):
        engine.set_fader(1.01)
    with pytest.raises(FaderRefused, match="locked gain"):
        engine.set_fader_db(0.5)
    assert engine.fader_db == pytest.approx(-3.0)  # unchanged by the refused moves
    engine.fader_step(+1.0)
    engine.fader_step(+1.0)
    engine.fader_step(+1.0)  # -3 + 3 = 0 dB: at the locked gain
    assert engine.fader_db == pytest.approx(0.0, abs=1e-9)
    with pytest.raises(FaderRefused, match="cannot go higher"):
        engine.fader_step(+1.0)
    with pytest.raises(FaderRefused):
        engine.set_fader(float("nan"))
    with pytest.raises(FaderRefused):
        engine.set_fader(-0.1)


def test_fader_steps_down_to_silence_and_back():
    engine = Engine([cue("a", sine(200, 0.1))])
    engine.set_fader_db(-59.5)
    assert engine.fader_step(-1.0) == -math.inf
    assert engine.fader_db == -math.inf
    assert engine.fader_step(+1.0) == -60.0


@pytest.mark.parametrize("state", ["playing", "fading", "boundary", "cut", "quiet fader"])
def test_panic_reaches_silence_within_50_ms(state, tmp_path):
    log = ShowLog(tmp_path / "log.jsonl")
    a = cue("a", sine(500, 0.3, amp=0.9), then="next")
    b = cue("b", sine(700, 0.3, amp=0.9))
    c = cue("c", sine(900, 0.3, amp=0.9))
    engine = Engine([a, b, c], log=log)
    engine.go()
    if state == "boundary":
        play(engine, a.frames - 100)  # the next block crosses into b
    else:
        play(engine, 2000)
    if state == "fading":
        engine.fade_out(2.0)
        play(engine, 1000)
    elif state == "cut":
        engine.go(2)
        play(engine, 100)
    elif state == "quiet fader":
        engine.set_fader_db(-20.0)
        play(engine, 300)
    engine.panic()
    out = play(engine, 6000, blocks=(512,))
    loud = np.nonzero(out)[0]
    silent_from = (loud[-1] + 1) if loud.size else 0
    # within 50 ms of samples of the first block after the key (the ramp is 20 ms)
    assert silent_from <= 0.050 * RATE
    assert silent_from <= 0.020 * RATE
    assert np.all(out[silent_from:] == 0.0)
    events = engine.poll()
    assert any(e.kind == "stop" and "panic" in e.detail for e in events)
    assert engine.status().state == "panic"
    # the show is stopped until re-armed, then resumes at the next cue
    with pytest.raises(CueRefused, match="panic"):
        engine.go()
    assert np.all(play(engine, 2000) == 0.0)
    expected_next = 2 if state == "cut" else engine._last + 1  # a cue asked for but dropped stays next
    engine.rearm()
    assert engine.go() == expected_next
    assert np.any(play(engine, 2000) != 0.0)
    log.close()
    kinds = [r["event"] for r in read_log(tmp_path / "log.jsonl")]
    assert "panic" in kinds


def test_panic_when_idle_disarms():
    engine = Engine([cue("a", sine(200, 0.1))])
    engine.panic()
    assert np.all(play(engine, 1000) == 0.0)
    with pytest.raises(CueRefused):
        engine.go()
    engine.rearm()
    engine.go()
    assert np.any(play(engine, 1000) != 0.0)


@settings(max_examples=30, deadline=None)
@given(blocks=st.lists(st.integers(1, 5000), min_size=1, max_size=8),
       lengths=st.lists(st.integers(1, 3000), min_size=2, max_size=4))
def test_then_next_is_gapless_sample_exact(blocks, lengths):
    rng = np.random.default_rng(len(lengths) * 7919 + sum(lengths))
    cues = [cue(f"c{k}", rng.uniform(-0.9, 0.9, n).astype(np.float32), then="next")
            for k, n in enumerate(lengths)]
    engine = Engine(cues)
    engine.go()
    total = sum(lengths)
    out = play(engine, total + 500, blocks=tuple(blocks))
    assert np.array_equal(out[:total], np.concatenate([c.samples for c in cues]))
    assert np.all(out[total:] == 0.0)


def test_then_wait_stops_and_go_starts_next():
    a = cue("a", sine(200, 0.05))
    b = cue("b", sine(300, 0.05))
    engine = Engine([a, b])
    engine.go()
    out = play(engine, a.frames + 2000)
    assert np.all(out[a.frames:] == 0.0)
    assert engine.next_index == 1
    engine.go()
    assert np.array_equal(play(engine, b.frames), b.samples)


def test_auto_treats_wait_as_next():
    a = cue("a", sine(200, 0.05))
    b = cue("b", sine(300, 0.05))
    engine = Engine([a, b], auto=True)
    engine.go()
    out = play(engine, a.frames + b.frames)
    assert np.array_equal(out, np.concatenate([a.samples, b.samples]))


@pytest.mark.parametrize("status", ["stale", "over", "error"])
def test_not_ok_cue_cannot_be_started(status, tmp_path):
    log = ShowLog(tmp_path / "log.jsonl")
    a = cue("a", sine(200, 0.05), then="next")
    bad = cue("bad", sine(300, 0.05), status=status)
    engine = Engine([a, bad], log=log)
    with pytest.raises(CueRefused, match=status) as err:
        engine.go(1)
    assert "bad" in err.value.line()
    assert engine.status().state == "idle"
    # following on from a does not start it either: a plays, then silence
    engine.go(0)
    out = play(engine, a.frames + bad.frames)
    assert np.array_equal(out[:a.frames], a.samples)
    assert np.all(out[a.frames:] == 0.0)
    events = engine.poll()
    assert [e.kind for e in events] == ["start", "stop"]
    assert status in events[-1].detail and "may not be started" in events[-1].detail
    log.close()


def test_fade_out_ramps_to_silence_and_stops(tmp_path):
    log = ShowLog(tmp_path / "log.jsonl")
    a = cue("a", np.full(RATE, 0.5, np.float32))
    engine = Engine([a], log=log)
    engine.go()
    play(engine, 1000)
    engine.fade_out(0.1)
    out = play(engine, 8000)
    fade = int(0.1 * RATE)
    assert np.all(np.diff(out[:fade]) <= 0.0)  # never rises during the fade
    assert out[0] <= 0.5 and out[fade // 2] == pytest.approx(0.25, abs=1e-3)
    assert np.all(out[fade - 1:] == 0.0)
    assert engine.status().state == "idle"
    events = engine.poll()
    assert events[-1].kind == "stop" and events[-1].detail == "faded out"
    log.close()
    assert [r["event"] for r in read_log(tmp_path / "log.jsonl")] == ["start", "fade", "stop"]


def test_go_while_playing_cuts_quickly_then_starts_next_from_its_first_sample():
    a = cue("a", np.full(RATE, 0.5, np.float32))
    b = cue("b", sine(300, 0.2))
    engine = Engine([a, b], cut_s=0.02)
    engine.go()
    play(engine, 1000)
    engine.go()
    out = play(engine, 3000)
    cut = int(0.02 * RATE)
    assert np.all(np.abs(out[:cut]) <= 0.5) and np.all(np.diff(out[:cut]) <= 0)
    start = cut  # the cut's last sample is zero; b starts right after it
    assert np.array_equal(out[start:start + 1000], b.samples[:1000])


def test_callback_allocates_no_block_sized_arrays():
    a = cue("a", sine(300, 2.0))
    b = cue("b", sine(400, 2.0))
    engine = Engine([a, b], max_block_frames=4096)
    engine.go()
    out = np.zeros((4096, 1), np.float32)
    engine.render_into(out, 4096)  # warm up
    engine.set_fader(0.7)
    engine.fade_out(1.0)
    tracemalloc.start()
    try:
        before = tracemalloc.get_traced_memory()[0]
        tracemalloc.reset_peak()
        for _ in range(20):
            engine.render_into(out, 4096)
        peak = tracemalloc.get_traced_memory()[1] - before
    finally:
        tracemalloc.stop()
    # a single float32 block would be 16 KiB; views and scalars are a few hundred bytes
    assert peak < 4096 * 4 / 4


def test_cues_at_other_rates_are_resampled_ahead_and_never_louder():
    # A 1 kHz tone whose crests fall between samples at 44.1 kHz (from memory:
    # band-limited resampling rings a little above the source's sample peak).
    src = cue("a", sine(1000.0, 0.5, amp=0.9, rate=44100, phase=0.3), rate=44100)
    out = resample_cue(src, 48000)
    assert out.rate_hz == 48000
    assert abs(out.frames - round(src.frames * 48000 / 44100)) <= 2
    assert np.max(np.abs(out.samples)) <= np.max(np.abs(src.samples))
    spec = np.abs(np.fft.rfft(out.samples * np.hanning(out.frames)))
    assert np.fft.rfftfreq(out.frames, 1 / 48000)[np.argmax(spec)] == pytest.approx(1000, abs=3)
    engine = Engine([src, cue("b", sine(200, 0.1)), cue("c", sine(300, 0.1))])
    assert engine.rate_hz == 48000  # the most common rate among the cues
    assert all(c.rate_hz == 48000 for c in engine.cues)


def test_device_rate_negotiation_resamples_before_the_show(monkeypatch):
    sd = make_sd(devices=[("Box", 2, 44100.0, 0)], rates={0: {44100}})
    monkeypatch.setattr(devices, "import_sounddevice", lambda: sd)
    a = cue("a", sine(440, 0.5))
    engine = Engine([a])
    engine.open()
    assert engine.rate_hz == 44100 and sd.streams[0].samplerate == 44100
    assert engine.cues[0].frames == pytest.approx(a.frames * 44100 / 48000, abs=2)


def test_underrun_ramps_out_and_reports_then_resumes(monkeypatch, tmp_path):
    sd = make_sd()
    monkeypatch.setattr(devices, "import_sounddevice", lambda: sd)
    log = ShowLog(tmp_path / "log.jsonl")
    a = cue("a", np.full(RATE, 0.5, np.float32))
    b = cue("b", sine(300, 0.1))
    engine = Engine([a, b], log=log, cut_s=0.02)
    engine.open("desk")
    stream = sd.streams[0]
    engine.go()
    stream.pump(4)
    stream.pump(1, Flags(output_underflow=True))
    stream.pump(4)
    tail = np.concatenate(sd.played[4:])
    assert np.all(np.abs(tail) <= 0.5)
    assert np.all(tail[int(0.02 * RATE):] == 0.0)  # silent within the cut ramp
    events = engine.poll()
    err = [e for e in events if e.kind == "device_error"]
    assert err and "underrun" in err[0].detail and "next cue" in err[0].detail
    assert "underrun" in engine.status().message
    engine.go()  # resumes at the next cue
    stream.pump(2)
    assert np.array_equal(np.concatenate(sd.played[-2:])[:1000], b.samples[:1000])
    log.close()
    assert "device_error" in [r["event"] for r in read_log(tmp_path / "log.jsonl")]


def test_device_lost_mid_show_reports_and_resumes_after_reopen(monkeypatch, tmp_path):
    sd = make_sd()
    monkeypatch.setattr(devices, "import_sounddevice", lambda: sd)
    log = ShowLog(tmp_path / "log.jsonl")
    cues = [cue("a", sine(200, 1.0)), cue("b", sine(300, 0.1))]
    engine = Engine(cues, log=log)
    engine.open()
    engine.go()
    sd.streams[0].pump(3)
    sd.streams[0].lose_device()
    events = engine.poll()
    assert [e.kind for e in events][-1] == "device_error"
    assert "reconnect" in events[-1].detail and events[-1].cue == "a"
    st_ = engine.status()
    assert st_.state == "fault" and st_.cue_id is None and "reconnect" in st_.message
    with pytest.raises(CueRefused, match="fault"):
        engine.go()
    engine.reopen()
    assert len(sd.streams) == 2 and sd.streams[0].closed
    assert engine.status().state == "idle" and engine.next_index == 1
    engine.go()
    sd.streams[1].pump(1)
    assert np.array_equal(sd.played[-1], cues[1].samples[:512])


def test_stalled_device_is_a_fault(monkeypatch):
    sd = make_sd()
    monkeypatch.setattr(devices, "import_sounddevice", lambda: sd)
    engine = Engine([cue("a", sine(200, 1.0))], stall_s=0.05)
    engine.open()
    engine.go()
    sd.streams[0].pump(1)
    engine.poll()
    import time

    time.sleep(0.1)
    events = engine.poll()
    assert events and events[-1].kind == "device_error" and "stopped taking samples" in events[-1].detail
    assert sd.streams[0].closed  # it cannot wake up and play on by itself


def test_callback_error_goes_silent_and_reports(monkeypatch):
    sd = make_sd()
    monkeypatch.setattr(devices, "import_sounddevice", lambda: sd)
    engine = Engine([cue("a", sine(200, 1.0))])
    engine.open()
    engine.go()
    monkeypatch.setattr(engine, "render_into", lambda out, frames: 1 / 0)
    sd.streams[0].pump(1)
    assert np.all(sd.played[-1] == 0.0)
    events = engine.poll()
    assert events[-1].kind == "device_error" and "silenced" in events[-1].detail


def test_open_failure_is_a_clear_device_error(monkeypatch, tmp_path):
    from showkit.errors import DeviceError

    sd = make_sd(fail_start=True)
    monkeypatch.setattr(devices, "import_sounddevice", lambda: sd)
    log = ShowLog(tmp_path / "log.jsonl")
    engine = Engine([cue("a", sine(200, 0.1))], log=log)
    with pytest.raises(DeviceError, match="Desk Speakers") as err:
        engine.open()
    assert "showkit devices" in err.value.line()
    log.close()
    assert read_log(tmp_path / "log.jsonl")[-1]["event"] == "device_error"


# ---------------------------------------------------------------- property
OPS = st.one_of(
    st.tuples(st.just("go"), st.none()),
    st.tuples(st.just("go"), st.integers(0, 3)),
    st.tuples(st.just("fade"), st.floats(0.001, 0.2)),
    st.tuples(st.just("fader"), st.floats(0.0, 1.0)),
    st.tuples(st.just("fader_db"), st.floats(-70.0, 3.0)),
    st.tuples(st.just("step"), st.sampled_from([-3.0, -1.0, 1.0, 6.0])),
    st.tuples(st.just("panic"), st.none()),
    st.tuples(st.just("rearm"), st.none()),
)


def _apply(engine, op, arg):
    try:
        if op == "go":
            engine.go(arg)
        elif op == "fade":
            engine.fade_out(arg)
        elif op == "fader":
            engine.set_fader(arg)
        elif op == "fader_db":
            engine.set_fader_db(arg)
        elif op == "step":
            engine.fader_step(arg)
        elif op == "panic":
            engine.panic()
        elif op == "rearm":
            engine.rearm()
        return None
    except (CueRefused, FaderRefused) as exc:
        return type(exc)


@settings(max_examples=60, deadline=None)
@given(lengths=st.lists(st.integers(50, 3000), min_size=4, max_size=4),
       thens=st.lists(st.sampled_from(["wait", "next"]), min_size=4, max_size=4),
       stale=st.integers(-1, 3),
       steps=st.lists(st.tuples(OPS, st.integers(1, 5000)), min_size=1, max_size=25),
       seed=st.integers(0, 2**31 - 1))
def test_no_output_sample_exceeds_the_rendered_cue_at_that_position(lengths, thens, stale, steps, seed):
    """Random keys between random blocks: |out| <= |rendered sample at that position|.

    The gains the engine applies depend on the keys and cue lengths only, not on
    sample values, so three engines run the same keys: A on the real cues, B on
    all-ones cues (its output is the gain g), C on cues whose samples count
    1, 2, 3, ... (its output is code * g, and C / B recovers the position played).
    """
    rate = 8000
    rng = np.random.default_rng(seed)
    real = [rng.uniform(-1, 1, n).astype(np.float32) for n in lengths]
    offsets = np.cumsum([0] + lengths)
    codes = [np.arange(offsets[k] + 1, offsets[k + 1] + 1, dtype=np.float32) for k in range(4)]

    def show(sample_sets):
        cues = [RenderedCue(f"c{k}", "", s, rate, then=thens[k],
                            status="stale" if k == stale else "ok") for k, s in enumerate(sample_sets)]
        return Engine(cues, fade_s=0.05, fader_slew_s=0.01, max_block_frames=1024)

    a, b, c = show(real), show([np.ones(n, np.float32) for n in lengths]), show(codes)
    flat = np.concatenate(real)
    for (op, arg), block in steps:
        results = {_apply(e, op, arg) for e in (a, b, c)}
        assert len(results) == 1  # the three engines agree on every refusal
        outs = []
        for e in (a, b, c):
            buf = np.full((block, 1), np.nan, np.float32)
            e.render_into(buf, block)
            outs.append(buf[:, 0])
        oa, gain, code = outs
        assert np.all(np.isfinite(oa))
        assert np.all((gain >= 0.0) & (gain <= 1.0))
        playing = gain > 1e-20
        # Silent (gain 0: exactly 0) or a fader so low (<= 1e-20) that the position cannot be read back
        # from C / B in float32: still never more than the gain times a full-scale sample.
        assert np.all(np.abs(oa[~playing]) <= gain[~playing])
        pos = np.rint(code[playing] / gain[playing]).astype(np.int64) - 1
        assert np.all((pos >= 0) & (pos < flat.size))
        ref = flat[pos]
        assert np.all(np.abs(oa[playing]) <= np.abs(ref))
        # and it is the rendered sample times that gain
        np.testing.assert_allclose(oa[playing], ref * gain[playing], rtol=1e-6, atol=1e-30)


def test_start_is_logged_with_the_gain_at_the_start_not_at_the_poll(tmp_path):
    """The fader moved between the start and the next poll must not rewrite the start's gain."""
    from showkit.show.showlog import ShowLog, read_log

    cues = [RenderedCue("a", "a", np.ones(48000, np.float32) * 0.1, 48000, gain_db=-20.0)]
    log = ShowLog(tmp_path / "log.jsonl")
    engine = Engine(cues, log=log)
    out = np.zeros((256, 1), np.float32)
    engine.go()
    engine.render_into(out, 256)   # the cue starts here at the fader's unity
    engine.set_fader_db(-6.0)      # moved before the screen polls
    engine.poll()
    starts = [e for e in read_log(tmp_path / "log.jsonl") if e["event"] == "start"]
    assert starts and starts[0]["gain_db"] == pytest.approx(-20.0)
