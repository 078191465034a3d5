"""The real-time mixer alone: its state machine driven block by block, and its event ring.

No engine, no device, no log: the clock is the mixer's own frame count, the
output a numpy array.  Expected values follow from the mixer's contract (an
output sample is a cue sample times a gain in [0, 1]; panic silent within
``panic_frames``; ``then = "next"`` gapless; the ring loses nothing it can
hold and keeps the order); they are not taken from any outside source.
"""

from __future__ import annotations

import math
import sys
import threading

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from numpy.lib.stride_tricks import sliding_window_view

from showkit.show.mixer import Event, EventRing, Mixer, Reason, State

RATE = 8000
PANIC = int(math.floor(0.02 * RATE))   # 20 ms of frames, as the engine loads it
CUT = int(round(0.02 * RATE))
SLEW = int(round(0.01 * RATE))


def make(samples, follow=None, playable=None, cap=1024):
    m = Mixer(max_block_frames=cap)
    n = len(samples)
    m.load([np.asarray(s, np.float32) for s in samples],
           [True] * n if playable is None else playable,
           [False] * n if follow is None else follow,
           panic_frames=PANIC, cut_frames=CUT, fader_slew_frames=SLEW)
    return m


def play(m, frames, blocks=(64,)):
    """Drive the callback for ``frames`` frames in blocks cycling through ``blocks``."""
    out = np.full((frames, 1), np.nan, np.float32)
    pos, k = 0, 0
    while pos < frames:
        n = min(blocks[k % len(blocks)], frames - pos)
        m.render(out[pos:pos + n], n)
        pos += n
        k += 1
    return out[:, 0]


def events(m):
    lost, rows = m.ring.drain()
    assert lost == 0
    return [(Event(int(k)), int(i), int(f), Reason(int(r))) for k, i, f, r, _ in rows]


def test_go_playing_fade_idle_block_by_block():
    a = np.full(RATE, 0.5, np.float32)
    m = make([a])
    assert m.state == State.IDLE
    m.request_go(0)
    assert m.state == State.IDLE and m.busy()          # asked, not yet served
    first = play(m, 100, blocks=(100,))
    assert m.state == State.PLAYING and m.cur == 0 and m.pos == 100
    assert np.array_equal(first, a[:100])
    m.request_fade(400)
    fade = play(m, 100, blocks=(100,))
    assert m.state == State.FADING and m.fade_left == 300
    fade = np.concatenate([fade, play(m, 500, blocks=(100,))])
    assert m.state == State.IDLE and m.cur == -1 and not m.busy()
    # 0.5 * (400 - (j + 1)) / 400 from the fade's first frame: exactly 0 from j = 399
    j = np.arange(fade.size)
    np.testing.assert_allclose(fade, 0.5 * np.maximum(0, 400 - (j + 1)) / 400, rtol=1e-6, atol=0)
    assert np.all(fade[399:] == 0.0)
    assert events(m) == [(Event.START, 0, 0, Reason.OPERATOR), (Event.STOP, 0, 500, Reason.FADED)]


def test_end_of_last_cue_stops_it_at_its_last_frame():
    a = np.full(300, 0.25, np.float32)
    m = make([a])
    m.request_go(0)
    out = play(m, 1000, blocks=(128,))
    assert np.array_equal(out[:300], a) and np.all(out[300:] == 0.0)
    assert m.state == State.IDLE
    assert events(m) == [(Event.START, 0, 0, Reason.OPERATOR), (Event.STOP, 0, 300, Reason.LAST)]


def test_go_while_playing_cuts_then_starts_the_cue_asked_for():
    a, b = np.full(RATE, 0.5, np.float32), np.full(RATE, -0.25, np.float32)
    m = make([a, b])
    m.request_go(0)
    play(m, 256)
    m.request_go(1)
    out = play(m, 512)
    assert m.state == State.PLAYING and m.cur == 1
    assert np.all(np.diff(out[:CUT]) <= 0) and out[CUT - 1] == 0.0   # the cut ramp, to zero
    assert np.array_equal(out[CUT:], b[:512 - CUT])                  # b from its first sample
    assert events(m)[1:] == [(Event.STOP, 0, 256 + CUT, Reason.CUT),
                             (Event.START, 1, 256 + CUT, Reason.OPERATOR)]


@pytest.mark.parametrize("when", ["playing", "fading", "cutting", "boundary", "idle"])
@settings(max_examples=25, deadline=None)
@given(blocks=st.lists(st.integers(1, 2500), min_size=1, max_size=5), key_at=st.integers(0, 3000))
def test_panic_ramps_to_silence_within_20_ms_at_any_block_size(when, blocks, key_at):
    a = np.full(2 * RATE, 0.9, np.float32)
    b = np.full(2 * RATE, -0.7, np.float32)
    m = make([a, b], follow=[True, False])
    if when != "idle":
        m.request_go(0)
    if when == "boundary":  # a ends inside the ramp; b follows on under it and stops with it
        key_at = a.size - 2 - key_at % (PANIC - 2)
    play(m, key_at, blocks=tuple(blocks))
    if when == "fading":
        m.request_fade(RATE)
    elif when == "cutting":
        m.request_go(1)
    play(m, 1, blocks=(1,))  # served
    m.request_panic()
    assert m.disarmed()
    served_at = m.frames_total
    out = play(m, 4000, blocks=tuple(blocks))
    assert np.all(np.isfinite(out))
    loud = np.nonzero(out)[0]
    silent_from = loud[-1] + 1 if loud.size else 0
    assert silent_from <= PANIC <= 0.020 * RATE                  # within 20 ms of the key's block
    assert np.all(np.abs(out[1:]) <= np.abs(out[:-1]) + 1e-7)     # the ramp never rises
    assert m.state == State.PANIC and m.cur == -1 and m.pending == -1 and m.disarmed()
    evs = events(m)
    if when != "idle":
        assert evs[-1][0] == Event.STOP and evs[-1][2] <= served_at + PANIC - 1
    # nothing starts until re-armed: a go is ignored, and the output stays silent
    m.request_go(1)
    assert np.all(play(m, 500, blocks=tuple(blocks)) == 0.0)
    assert not any(e[0] == Event.START for e in events(m))
    m.request_arm()
    play(m, 1, blocks=(1,))
    assert m.state == State.IDLE and not m.disarmed()
    m.request_go(1)
    assert np.any(play(m, 200) != 0.0) and m.state == State.PLAYING


@pytest.mark.parametrize("target, level", [(2.0, 1.0), (math.inf, 1.0), (math.nan, 0.0),
                                           (-1.0, 0.0), (-math.inf, 0.0), (0.25, 0.25)])
def test_fader_target_is_held_to_zero_to_one(target, level):
    a = np.full(1000, 0.5, np.float32)
    m = make([a])
    m.set_fader(target)
    m.request_go(0)
    out = play(m, 1000)
    assert np.array_equal(out, a * np.float32(level))  # never above the cue, NaN is silence


@pytest.mark.parametrize("start, target", [(1.0, 0.1), (0.2, 0.9), (1.0, 0.0), (0.0, 1.0)])
def test_fader_move_while_playing_is_a_monotone_ramp_that_stops_at_the_target(start, target):
    a = np.full(2000, 0.5, np.float32)
    m = make([a])
    m.set_fader(start)
    m.request_go(0)
    play(m, 100)                        # playing at ``start`` (snapped: nothing played before)
    m.set_fader(target)
    gain = play(m, 1000, blocks=(37,)) / 0.5
    steps = np.diff(gain)
    if target < start:
        assert np.all(steps <= 1e-7) and np.all(gain >= target - 1e-7)
    else:
        assert np.all(steps >= -1e-7) and np.all(gain <= target + 1e-7)
    assert np.all(np.abs(steps) <= 1.0 / SLEW + 1e-6)              # no faster than the slew
    ramp = int(math.ceil(abs(target - start) * SLEW))
    assert np.allclose(gain[ramp:], np.float32(target), atol=1e-6)  # settled within the slew
    assert np.all(gain <= 1.0)


@settings(max_examples=30, deadline=None)
@given(blocks=st.lists(st.integers(1, 3000), min_size=1, max_size=6),
       lengths=st.lists(st.integers(1, 2000), min_size=2, max_size=5))
def test_then_next_is_gapless_and_logged_at_the_exact_frame(blocks, lengths):
    rng = np.random.default_rng(sum(lengths))
    cues = [rng.uniform(-0.9, 0.9, n).astype(np.float32) for n in lengths]
    m = make(cues, follow=[True] * len(cues))
    m.request_go(0)
    total = sum(lengths)
    out = play(m, total + 300, blocks=tuple(blocks))
    assert np.array_equal(out[:total], np.concatenate(cues)) and np.all(out[total:] == 0.0)
    ends = np.cumsum(lengths)
    want = [(Event.START, 0, 0, Reason.OPERATOR)]
    for k, end in enumerate(ends[:-1]):
        want += [(Event.STOP, k, int(end), Reason.END), (Event.START, k + 1, int(end), Reason.FOLLOW)]
    want.append((Event.STOP, len(cues) - 1, total, Reason.LAST))
    assert events(m) == want


def test_follow_on_stops_before_a_cue_that_may_not_be_played():
    a, bad = np.full(100, 0.5, np.float32), np.full(100, 0.5, np.float32)
    m = make([a, bad], follow=[True, False], playable=[True, False])
    m.request_go(1)                     # not playable: ignored
    assert np.all(play(m, 100) == 0.0) and m.state == State.IDLE
    m.request_go(0)
    out = play(m, 300)
    assert np.array_equal(out[:100], a) and np.all(out[100:] == 0.0)
    assert events(m) == [(Event.START, 0, 100, Reason.OPERATOR), (Event.STOP, 0, 200, Reason.NEXT_REFUSED)]


def test_underflow_ramps_out_with_the_cut_ramp():
    a = np.full(RATE, 0.5, np.float32)
    m = make([a, a])
    m.request_go(0)
    play(m, 256)
    m.underflow()
    out = play(m, 512)
    assert np.all(out[CUT - 1:] == 0.0) and m.state == State.IDLE
    assert [e[0] for e in events(m)] == [Event.START, Event.UNDERFLOW, Event.STOP]


def test_drop_forgets_the_cue_and_keeps_the_waiting_one_next():
    a = np.full(RATE, 0.5, np.float32)
    m = make([a, a, a])
    m.request_go(0)
    play(m, 64)
    m.request_go(2)
    play(m, 64)                         # 0 is being cut, 2 waits
    m.drop()
    assert m.cur == -1 and m.state == State.IDLE and m.last == 0 and m.next_start() == 2
    assert np.all(play(m, 256) == 0.0)


def test_drop_during_a_panic_ramp_leaves_nothing_to_ramp_and_rearm_is_served():
    a = np.full(RATE, 0.5, np.float32)
    m = make([a])
    m.request_go(0)
    play(m, 64)
    m.request_panic()
    play(m, 32)                         # the ramp runs: still disarmed, busy
    assert m.panic_left > 0 and m.busy()
    m.drop()                            # the device went away mid-ramp
    assert not m.busy() and m.state == State.PANIC and m.disarmed()
    m.request_arm()
    m.serve_requests()                  # what the engine does with no stream
    assert m.state == State.IDLE and not m.disarmed()


def test_callback_failure_reports_and_forgets_an_unserved_go():
    a = np.full(RATE, 0.5, np.float32)
    m = make([a, a])
    m.request_go(0)
    play(m, 64)
    m.request_go(1)                     # not served: the callback fails first
    m.fail()
    assert not m.busy() and m.cur == -1 and m.last == 0
    assert np.all(play(m, 256) == 0.0)
    assert [e[0] for e in events(m)] == [Event.START, Event.ERROR]


# ---------------------------------------------------------------- the event ring
@settings(max_examples=60, deadline=None)
@given(size=st.integers(1, 16), batches=st.lists(st.integers(0, 40), min_size=1, max_size=30))
def test_ring_never_drops_or_reorders_what_it_can_hold(size, batches):
    """Post batches, draining after each: whatever fits is returned in order, the rest counted."""
    ring = EventRing(size)
    seq, got, lost_total = 0, [], 0
    for n in batches:
        for _ in range(n):
            ring.post(seq, seq, seq, seq, seq)
            seq += 1
        lost, rows = ring.drain()
        expect_lost = max(0, n - size)
        assert lost == expect_lost
        lost_total += lost
        assert [r[0] for r in rows] == list(range(seq - n + expect_lost, seq))
        assert all(len(set(r)) == 1 for r in rows)
        got += [int(r[0]) for r in rows]
    assert got == sorted(got) and len(got) + lost_total == seq
    assert ring.drain() == (0, [])


def test_ring_between_threads_returns_no_torn_duplicate_or_reordered_event():
    """A producer thread posts as fast as it can; the consumer drains at the same time.

    Each event carries its sequence number in all five columns, so a row half
    overwritten while it was copied would show mixed numbers.  (CPython 3.11
    does not switch threads inside :meth:`EventRing.post`, which calls nothing
    in Python; the next test stops a producer mid-row by hand.)
    """
    ring = EventRing(8)
    total = 60000

    def produce():
        for k in range(total):
            ring.post(k, k, k, k, k)

    t = threading.Thread(target=produce)
    switch = sys.getswitchinterval()
    sys.setswitchinterval(1e-6)  # switch threads as often as the interpreter can
    try:
        t.start()
        got, lost = _consume(ring, t)
    finally:
        sys.setswitchinterval(switch)
    assert len(got) + lost == total
    assert np.all(np.diff(got) > 0)
    assert got and got[-1] == total - 1


def _consume(ring, producer):
    got, lost = [], 0
    while True:
        done = not producer.is_alive()
        n, rows = ring.drain()
        lost += n
        for r in rows:
            assert len(set(r)) == 1, r
            got.append(int(r[0]))
        if done:
            producer.join()
            return got, lost


def test_ring_counts_a_row_overwritten_while_copied_as_lost_never_torn():
    ring = EventRing(4)
    for k in range(4):
        ring.post(k, k, k, k, k)
    # a producer stopped half-way through its fifth row, which reuses the first slot
    ring.begun = 5
    ring._rows[0, :2] = 4
    lost, rows = ring.drain()
    assert lost == 1 and [r[0] for r in rows] == [1, 2, 3]
    ring._rows[0, 2:] = 4
    ring.written = 5
    assert ring.drain() == (0, [(4.0,) * 5])


def test_render_posts_in_order_past_the_ring_and_counts_what_was_lost():
    cues = [np.full(10, 0.5, np.float32)] * 300
    m = make(cues, follow=[True] * 300)
    m.request_go(0)
    play(m, 3000, blocks=(3000,))       # 600 events in one block, the ring holds 256
    lost, rows = m.ring.drain()
    assert lost == 600 - 256 and len(rows) == 256
    frames = [r[2] for r in rows]
    assert frames == sorted(frames) and rows[-1][0] == Event.STOP and rows[-1][3] == Reason.LAST


# ---------------------------------------------------------------- the property
REQUESTS = st.one_of(
    st.tuples(st.just("go"), st.integers(-1, 5)),
    st.tuples(st.just("fade"), st.integers(1, 2000)),
    st.tuples(st.just("fader"), st.floats(allow_nan=True, allow_infinity=True)),
    st.tuples(st.just("fader"), st.floats(0.0, 1.0)),
    st.tuples(st.just("panic"), st.none()),
    st.tuples(st.just("arm"), st.none()),
    st.tuples(st.just("cut"), st.none()),
    st.tuples(st.just("underflow"), st.none()),
)


def _request(m, op, arg):
    if op == "go":
        m.request_go(arg)
    elif op == "fade":
        m.request_fade(arg)
    elif op == "fader":
        m.set_fader(arg)
    elif op == "panic":
        m.request_panic()
    elif op == "arm":
        m.request_arm()
    elif op == "cut":
        m.request_cut()
    else:
        m.underflow()


def _clamped(target):
    return min(1.0, max(0.0, float(target)))


@settings(max_examples=80, deadline=None)
@given(lengths=st.lists(st.integers(1, 2500), min_size=4, max_size=4),
       levels=st.lists(st.floats(0.05, 1.0), min_size=4, max_size=4, unique=True),
       follow=st.lists(st.booleans(), min_size=4, max_size=4),
       playable=st.lists(st.booleans(), min_size=4, max_size=4),
       steps=st.lists(st.tuples(REQUESTS, st.integers(1, 3000)), min_size=1, max_size=30),
       tail_blocks=st.lists(st.integers(1, 700), min_size=1, max_size=4),
       seed=st.integers(0, 2**31 - 1))
def test_random_requests_never_exceed_the_cue_times_the_fader_and_end_silent_after_panic(
        lengths, levels, follow, playable, steps, tail_blocks, seed):
    """Random requests between random blocks, on three mixers given the same requests.

    The gains depend on the requests and cue lengths only, never on sample values,
    so: A plays cues at a steady level L_k with random signs (the rendered cue),
    G plays all-ones cues (its output is the gain g applied), K plays cue k as
    the constant k + 1 (K / G names the cue playing at each sample).
    Claim: |A| <= L_k x the fader (the most it was set to over the last slew
    time, held to [0, 1]), never NaN; after a final panic, silent for good.
    """
    rng = np.random.default_rng(seed)
    lv = np.array(levels, np.float32)
    real = [lv[k] * rng.choice(np.float32([-1, 1]), n) for k, n in enumerate(lengths)]
    A = make(real, follow, playable)
    G = make([np.ones(n, np.float32) for n in lengths], follow, playable)
    K = make([np.full(n, k + 1, np.float32) for k, n in enumerate(lengths)], follow, playable)
    outs, targets = [[], [], []], []
    for (op, arg), block in steps:
        for m in (A, G, K):
            _request(m, op, arg)
        for out, m in zip(outs, (A, G, K)):
            out.append(play(m, block, blocks=(block,)))
        targets.append(np.full(block, _clamped(A.fader_target)))
    a, g, k = (np.concatenate(o) for o in outs)
    assert np.all(np.isfinite(a)) and np.all(np.isfinite(g))
    assert np.all((g >= 0.0) & (g <= 1.0))
    # the fader bound at each sample: the largest target in force over the last SLEW + 1 samples
    t = np.concatenate([np.ones(SLEW), np.concatenate(targets)])
    fader = sliding_window_view(t, SLEW + 1).max(axis=1)
    assert np.all(g <= fader * (1 + 1e-6) + 1e-12)
    assert np.all(a[g == 0.0] == 0.0)
    on = g > 1e-20  # below, float32 cannot name the cue; |a| <= g there
    assert np.all(np.abs(a[~on]) <= 1e-20)
    cue = np.rint(k[on] / g[on]).astype(np.int64) - 1
    assert np.all((cue >= 0) & (cue < 4))
    assert np.all(np.asarray(playable)[cue])  # no cue that may not be played ever sounds
    assert np.all(np.abs(a[on]) <= lv[cue] * fader[on] * (1 + 1e-5))
    # a final panic: silent from panic_frames after its block, and a go is not served
    A.request_panic()
    A.request_go(0)
    tail = play(A, 3 * PANIC + 2000, blocks=tuple(tail_blocks))
    assert np.all(np.isfinite(tail)) and np.all(tail[PANIC - 1:] == 0.0)
    assert A.state == State.PANIC and A.cur == -1
