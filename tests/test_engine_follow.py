"""The engine follows today's conditions: withdrawn cues never start, a capped fader stays down,
new renders of the same show keep its position.

Expected values follow from the engine's contract (output = rendered samples times a gain
in [0, 1]); they are not taken from any outside source.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from showkit.show.engine import CueRefused, Engine, FaderRefused
from showkit.show.playlist import RenderedCue
from showkit.show.showlog import ShowLog, read_log

RATE = 48000


def sine(freq_hz, seconds, amp=0.5):
    t = np.arange(int(round(seconds * RATE))) / RATE
    return (amp * np.sin(2 * np.pi * freq_hz * t)).astype(np.float32)


def cue(cid, samples, then="wait"):
    return RenderedCue(cid, f"label {cid}", samples, RATE, then=then, gain_db=-10.0, ceiling_db=-5.0)


def play(engine, frames, block=512):
    out = np.zeros((frames, 1), np.float32)
    for pos in range(0, frames, block):
        n = min(block, frames - pos)
        engine.render_into(out[pos:pos + n], n)
    return out[:, 0]


def test_a_withdrawn_cue_is_neither_followed_into_nor_started(tmp_path):
    log = ShowLog(tmp_path / "log.jsonl")
    a, b, c = cue("a", sine(300, 0.1), then="next"), cue("b", sine(400, 0.1), then="next"), cue("c", sine(500, 0.1))
    engine = Engine([a, b, c], log=log)
    engine.go()
    play(engine, 512)
    engine.withdraw(1, "the manometer reading dropped", "wait for the check")
    out = play(engine, a.frames + b.frames + c.frames)
    # a played to its end, then nothing: b may not follow on, and c is not reached by a follow-on
    assert np.all(out[a.frames - 512 + 1:] == 0.0)
    assert engine.status().cue_id is None
    with pytest.raises(CueRefused, match="manometer"):
        engine.go(1)
    assert engine.next_index == 2 and engine.status().skipped_ids == ("b",)
    engine.go()
    assert np.array_equal(play(engine, c.frames), c.samples)
    engine.poll()  # the callback's events into the log
    log.close()
    records = read_log(tmp_path / "log.jsonl")
    assert [r["cue"] for r in records if r["event"] == "start"] == ["a", "c"]
    assert any(r["event"] == "check" and r["cue"] == "b" and "withdrawn" in r["detail"] for r in records)


@settings(max_examples=25, deadline=None)
@given(cap_db=st.floats(min_value=-40.0, max_value=-0.1), before_db=st.floats(min_value=-20.0, max_value=0.0))
def test_a_capped_fader_keeps_every_sample_under_the_cap(cap_db, before_db):
    a = cue("a", sine(220, 0.5, amp=0.9))
    engine = Engine([a])
    engine.set_fader_db(before_db)
    engine.go()
    play(engine, 4800)
    fader = engine.cap_fader_db(cap_db, "test")
    assert fader == pytest.approx(min(cap_db, before_db), abs=1e-4)
    ramp = int(0.03 * RATE) + 512                      # the 30 ms fader slew, and one block
    out = play(engine, 9600)[ramp:]
    ref = a.samples[4800 + ramp:4800 + 9600]
    assert np.all(np.abs(out) <= np.abs(ref) * 10 ** (min(cap_db, before_db) / 20) * (1 + 1e-5) + 1e-9)
    with pytest.raises(FaderRefused):
        engine.set_fader_db(cap_db + 0.05)


def test_new_renders_of_the_same_show_keep_its_position():
    a, b = cue("a", sine(300, 0.05)), cue("b", sine(400, 0.05))
    engine = Engine([a, b])
    engine.go()
    play(engine, a.frames + 512)
    quieter = RenderedCue("b", "label b", b.samples * np.float32(0.5), RATE, gain_db=-16.0, ceiling_db=-5.0)
    engine.replace_cues([a, quieter])
    assert engine.next_index == 1
    engine.go()
    assert np.array_equal(play(engine, b.frames), quieter.samples)
    with pytest.raises(Exception, match="not the same show"):
        engine.replace_cues([b, a])
