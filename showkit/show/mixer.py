"""The real-time mixer: the audio callback's state machine and its event ring.

No I/O, no text, no logging, no clock but the count of frames it has rendered.
The engine (:mod:`showkit.show.engine`) opens the stream, takes the operator's
keys, refuses what may not be done, and turns the ring's events into log lines.

What it plays
-------------
Cues as float32 sample arrays, already at their locked gains, fades applied and
verified.  The mixer only scales them *down*: an output sample is a cue sample
times ``fader x fade envelope x panic ramp``, each factor in [0, 1].  So no
output sample is ever above the rendered cue's sample at that position.

Two threads, one writer per field
---------------------------------
The operator's thread calls :meth:`Mixer.set_fader` and the ``request_*``
methods: a request sets its argument, then bumps its counter.  The audio thread
calls :meth:`Mixer.render`; at the start of each block it serves the requests
whose counters moved, in a fixed order (panic, re-arm, go, fade, cut), and posts
what happened to the :class:`EventRing`, which the operator's thread drains.
No lock is taken and nothing is allocated in :meth:`Mixer.render` (its buffers
are made in the constructor; a longer block is rendered in pieces), so the
audio thread never waits for the operator's.

States (:class:`State`)
-----------------------
::

    IDLE    --go-------------------------> PLAYING
    PLAYING --end, then "wait"-----------> IDLE
    PLAYING --end, then "next"-----------> PLAYING (the next cue, gapless)
    PLAYING --fade, cut, underrun--------> FADING
    FADING  --envelope at zero-----------> IDLE, or PLAYING (the cue asked for meanwhile)
    any     --panic----------------------> PANIC (ramp to zero in ``panic_frames``, cue stopped)
    PANIC   --re-arm (ramp finished)-----> IDLE

In PANIC nothing starts except a ``then = "next"`` follow-on that falls inside
the panic ramp (it plays under the ramp and stops with it).  FAULT and CLOSED
are the engine's (the stream's) states; the mixer never enters them.
"""

from __future__ import annotations

from enum import IntEnum

import numpy as np

from showkit.show.status import State  # the one state enum, shared with the engine and the screens

#: Events the ring holds before the oldest are overwritten.
RING = 256


class Event(IntEnum):
    """What the callback posts to the ring (column 0)."""

    START = 1
    STOP = 2
    UNDERFLOW = 3
    ERROR = 4


class Reason(IntEnum):
    """How a cue started or stopped (column 3)."""

    OPERATOR = 0
    FOLLOW = 1
    END = 2
    FADED = 3
    CUT = 4
    PANIC = 5
    NEXT_REFUSED = 6
    UNDERFLOW = 7
    LAST = 8


class EventRing:
    """A lock-free single-producer, single-consumer ring of numeric events.

    Each event is a row of five float64 (kind, cue index, frame, reason, fader).
    The producer (the audio thread) announces the row it starts (:attr:`begun`),
    writes it, then bumps :attr:`written`; it never waits, so a consumer too slow
    by more than ``size`` events loses the oldest, and :meth:`drain` counts them.
    A row the producer began to overwrite while the consumer copied it is counted
    lost too, never returned torn (a seqlock's check, one counter each side).
    """

    WIDTH = 5

    def __init__(self, size: int = RING):
        self.size = int(size)
        self._rows = np.zeros((self.size, self.WIDTH), np.float64)
        self.begun = 0     # written by the producer only: rows started
        self.written = 0   # written by the producer only: rows finished
        self._read = 0     # written by the consumer only

    def post(self, kind, index, frame, reason, fader) -> None:
        """Producer: add one event (no allocation, no lock)."""
        rows, i = self._rows, self.written % self.size
        self.begun = self.written + 1
        rows[i, 0] = kind
        rows[i, 1] = index
        rows[i, 2] = frame
        rows[i, 3] = reason
        rows[i, 4] = fader
        self.written += 1

    def drain(self) -> tuple[int, list[tuple[float, ...]]]:
        """Consumer: ``(events lost, the events not yet read, oldest first)``."""
        lost, out = 0, []
        while self._read < self.written:
            behind = self.written - self._read - self.size
            if behind > 0:
                lost += behind
                self._read += behind
                continue
            i = self._read
            row = tuple(self._rows[i % self.size].tolist())
            self._read = i + 1
            if self.begun - i > self.size:  # the producer began this slot's next row while we copied
                lost += 1
            else:
                out.append(row)
        return lost, out


class Mixer:
    """The callback's state machine; see the module docstring.

    Parameters
    ----------
    max_block_frames : int
        Size of the preallocated work buffers, frames; longer blocks go in pieces.
    ring_size : int
        Events the ring holds.

    Call :meth:`load` with the show before rendering.  Fields the audio thread
    writes and the operator's thread reads: ``state``, ``cur`` (the cue playing,
    -1 for none), ``pos`` (its next frame), ``last`` (the last cue started),
    ``pending`` (a cue asked for while another is cut), ``dropped`` (a cue asked
    for, then dropped by a panic or a fault), ``fade_left``/``fade_total`` (the
    fade envelope, frames), ``panic_left`` (the panic ramp, frames) and
    ``frames_total`` (the audio clock).
    """

    def __init__(self, max_block_frames: int = 4096, ring_size: int = RING):
        cap = int(max_block_frames)
        self._cap = cap
        self._steps = np.arange(1, cap + 1, dtype=np.float32)  # ramp index 1..cap
        self._buf, self._gain, self._tmp, self._env = (np.zeros(cap, np.float32) for _ in range(4))
        self.ring = EventRing(ring_size)
        self.load([], [], [], panic_frames=1, cut_frames=1, fader_slew_frames=1)
        self.reset()

    def load(self, samples, playable, follow, *, panic_frames: int, cut_frames: int,
             fader_slew_frames: int) -> None:
        """The show at the stream's rate; the state is kept.

        samples : list of float32 arrays, one per cue, in show order.
        playable : list of bool, whether each cue may be started.
        follow : list of bool, whether the next cue follows each with no gap.
        panic_frames, cut_frames : the panic and cut ramps, frames (>= 1).
        fader_slew_frames : frames for the fader to travel full range (>= 1).
        """
        self._samples = list(samples)
        self._len = [len(s) for s in self._samples]
        self._playable = [bool(p) for p in playable]
        self._follow = [bool(f) for f in follow]
        self._panic_frames = max(1, int(panic_frames))
        self._cut_frames = max(1, int(cut_frames))
        self._fader_step = 1.0 / max(1, int(fader_slew_frames))

    def reset(self) -> None:
        """Nothing playing, armed, fader at unity, no request outstanding."""
        # Written by the operator's thread.
        self.fader_target = 1.0
        self.requested = -1
        self._go_req = self._go_index = self._fade_req = self._fade_frames_req = 0
        self._panic_req = self._arm_req = self._cut_req = 0
        # Written by the audio thread.
        self._go_seen = self._fade_seen = self._panic_seen = self._arm_seen = self._cut_seen = 0
        self.state = State.IDLE
        self.cur = self.last = self.pending = self.dropped = -1
        self.pos = self.fade_left = self.fade_total = self.panic_left = self.frames_total = 0
        self.fade_reason = Reason.FADED
        self._fader_g = 1.0

    # ------------------------------------------------- the operator's thread
    def set_fader(self, level: float) -> None:
        """The fader's target, a multiplier; the callback holds it to [0, 1] (NaN is 0)."""
        self.fader_target = level

    def withhold(self, index: int) -> None:
        """Cue ``index`` may not be started from now on, by a go or a follow-on (one list store)."""
        self._playable[index] = False

    def may_start(self, index: int) -> bool:
        """Whether cue ``index`` may be started (it was playable when loaded and is not withheld)."""
        return 0 <= index < len(self._playable) and self._playable[index]

    def request_go(self, index: int) -> None:
        """Start cue ``index`` (cutting the one playing); ignored in PANIC or for a cue not playable."""
        self.requested = index
        self._go_index = index
        self._go_req += 1

    def request_fade(self, frames: int) -> None:
        """Fade the cue playing to zero over ``frames`` (>= 1), then stop it."""
        self._fade_frames_req = max(1, int(frames))
        self._fade_req += 1

    def request_cut(self) -> None:
        """Ramp the cue playing out over the cut ramp; nothing follows it."""
        self._cut_req += 1

    def request_panic(self) -> None:
        """Ramp everything to zero within ``panic_frames`` and refuse starts until re-armed."""
        self._panic_req += 1

    def request_arm(self) -> None:
        """Allow starts again (served once the panic ramp has finished)."""
        self._arm_req += 1

    def disarmed(self) -> bool:
        """True from a panic request until a re-arm request, as the operator sees it."""
        if self._panic_req != self._panic_seen or self.panic_left > 0:
            return True
        return self.state == State.PANIC and self._arm_req == self._arm_seen

    def shown_state(self) -> State:
        """The state as the operator sees it (a panic or re-arm asked for counts at once)."""
        if self.disarmed():
            return State.PANIC
        return State.IDLE if self.cur < 0 else self.state

    def busy(self) -> bool:
        """True while a cue plays, a go is not yet served, a panic ramp runs or a cue waits."""
        return (self.cur >= 0 or self._go_req != self._go_seen or self.panic_left > 0
                or self.pending >= 0)

    def next_start(self) -> int:
        """The index after the last cue started or asked for (a cue asked for, then dropped, stays next)."""
        if self.dropped >= 0 and self.dropped == self.requested and self._go_seen == self._go_req:
            return self.dropped
        return max(self.last, self.requested) + 1

    def drop(self) -> None:
        """The output is gone (device lost or callback failed): forget the cue playing and the one waiting.

        The cue playing counts as played; the one waiting stays next.  Call it
        from the callback, or from the operator's thread when no callback can run.
        """
        if self.cur >= 0:
            self.last = self.cur
        self._drop_pending()
        self.cur = -1
        self.pos = self.fade_left = self.fade_total = self.panic_left = 0  # nothing left to ramp
        if self.state != State.PANIC:
            self.state = State.IDLE

    # ------------------------------------------------------ the audio thread
    def underflow(self) -> None:
        """The device ran out of samples: ramp the cue out (cut ramp); nothing follows it."""
        if self.cur >= 0:
            self._post(Event.UNDERFLOW, self.cur, 0)
            self._drop_pending()
            self._start_fade(self._cut_frames, Reason.UNDERFLOW)

    def fail(self) -> None:
        """The callback failed (the caller silences the block): report, forget what played."""
        self._post(Event.ERROR, self.cur, 0)
        self.drop()
        self._go_seen = self._go_req

    def render(self, out: np.ndarray, frames: int) -> None:
        """Fill ``out[:frames]`` (shape (frames, channels), float32) with the show."""
        done = 0
        while done < frames:
            n = min(self._cap, frames - done)
            self._block(out[done:done + n], n)
            done += n

    def _block(self, out: np.ndarray, n: int) -> None:
        """One block of at most ``max_block_frames``: requests, gains, samples, output."""
        was_silent = self.cur < 0
        self.serve_requests()
        gain, buf = self._gain[:n], self._buf[:n]
        self._fader_gain(gain, n, snap=was_silent)
        silent_from = self._panic_gain(gain, n)
        np.clip(gain, 0.0, 1.0, out=gain)
        self._fill(buf, n)
        np.multiply(buf, gain, out=buf)
        if silent_from < n:  # the panic ramp ended in this block
            buf[silent_from:].fill(0.0)
            self._end_panic(silent_from)
        out[:, :] = buf[:, None]
        self.frames_total += n

    def _fader_gain(self, gain: np.ndarray, n: int, snap: bool) -> None:
        """The fader, slewed toward its target (snapped to it after silence), into ``gain``."""
        target = min(1.0, max(0.0, float(self.fader_target)))
        if snap or self._fader_g == target:
            self._fader_g = target
            gain.fill(target)
            return
        step = self._fader_step if target > self._fader_g else -self._fader_step
        np.multiply(self._steps[:n], step, out=gain)
        np.add(gain, self._fader_g, out=gain)
        (np.minimum if step > 0 else np.maximum)(gain, target, out=gain)
        self._fader_g = float(gain[n - 1])

    def _panic_gain(self, gain: np.ndarray, n: int) -> int:
        """Multiply the panic ramp into ``gain``; returns where the block falls silent (n: not in it)."""
        if self.panic_left <= 0:
            return n
        tmp = self._tmp[:n]
        self._ramp(self.panic_left, self._panic_frames, n, tmp)
        np.multiply(gain, tmp, out=gain)
        silent_from = max(0, self.panic_left - 1) if self.panic_left <= n else n
        self.panic_left = max(0, self.panic_left - n)
        return silent_from

    def _fill(self, buf: np.ndarray, n: int) -> None:
        """Cue samples into ``buf[:n]`` (fade envelope applied), across cue ends; then zeros."""
        filled = 0
        while filled < n:
            if self.cur < 0:
                buf[filled:n].fill(0.0)
                return
            filled += self._copy(buf, filled, n - filled)
            if self.fade_total > 0 and self.fade_left <= 0:
                self._fade_ended(filled)
            elif self.pos >= self._len[self.cur]:
                self._cue_ended(filled)

    def _copy(self, buf: np.ndarray, at: int, room: int) -> int:
        """The current cue's next samples into ``buf[at:]``, up to its end or its fade's; returns how many."""
        cur, pos = self.cur, self.pos
        m = min(room, self._len[cur] - pos)
        fading = self.fade_total > 0
        if fading:
            m = min(m, self.fade_left)
        if m > 0:
            seg = buf[at:at + m]
            np.copyto(seg, self._samples[cur][pos:pos + m])
            if fading:
                env = self._env[:m]
                self._ramp(self.fade_left, self.fade_total, m, env)
                np.multiply(seg, env, out=seg)
                self.fade_left -= m
            self.pos = pos + m
        return max(0, m)

    def _ramp(self, left: int, total: int, n: int, out: np.ndarray) -> None:
        """``out[j] = max(0, left - (j + 1)) / total`` for j < n: exactly 0 from j = left - 1."""
        np.subtract(float(left), self._steps[:n], out=out)
        np.maximum(out, 0.0, out=out)
        np.multiply(out, 1.0 / total, out=out)

    # The state machine's moves, made by the callback (requests, cue ends, panic).
    def serve_requests(self) -> None:
        """Serve the requests made since the last block (called by the callback)."""
        if self._panic_req != self._panic_seen:
            self._panic_seen = self._panic_req
            self._panic()
        if self._arm_req != self._arm_seen and self.panic_left <= 0:
            self._arm_seen = self._arm_req
            if self.state == State.PANIC:
                self.state = State.IDLE
        if self._go_req != self._go_seen:
            self._go_seen = self._go_req
            self._go(self._go_index)
        if self._fade_req != self._fade_seen:
            self._fade_seen = self._fade_req
            if self.cur >= 0 and self.state != State.PANIC:
                self._start_fade(self._fade_frames_req, Reason.FADED)
        if self._cut_req != self._cut_seen:
            self._cut_seen = self._cut_req
            if self.cur >= 0:
                self.pending = -1
                self._start_fade(self._cut_frames, Reason.CUT)

    def _panic(self) -> None:
        self.state = State.PANIC
        self._drop_pending()
        if self.cur >= 0:
            self.fade_reason = Reason.PANIC  # a fade or cut running ends as part of the panic
            if self.panic_left <= 0:
                self.panic_left = self._panic_frames

    def _go(self, index: int) -> None:
        if self.state == State.PANIC or not 0 <= index < len(self._samples) or not self._playable[index]:
            return
        if self.cur < 0:
            self._start(index, Reason.OPERATOR, 0)
        else:
            self.pending = index
            self._start_fade(self._cut_frames, Reason.CUT)

    def _end_panic(self, at: int) -> None:
        if self.cur >= 0:
            self._stop(Reason.PANIC, at)
        self.pending = -1
        self.state = State.PANIC

    def _fade_ended(self, at: int) -> None:
        pending = self.pending
        self.pending = -1
        self._stop(self.fade_reason, at)
        self._start_allowed(pending, at)

    def _cue_ended(self, at: int) -> None:
        cur, pending = self.cur, self.pending
        self.pending = -1
        nxt = cur + 1
        if pending >= 0:
            self._stop(Reason.END, at)
            self._start_allowed(pending, at)
        elif self._follow[cur] and nxt < len(self._samples):
            if self._playable[nxt]:
                self._post(Event.STOP, cur, Reason.END, at)
                self._start(nxt, Reason.FOLLOW, at)
            else:
                self._stop(Reason.NEXT_REFUSED, at)
        else:
            self._stop(Reason.LAST if nxt >= len(self._samples) else Reason.END, at)

    def _start_allowed(self, index: int, at: int) -> None:
        if index >= 0 and self._playable[index] and self.state != State.PANIC:
            self._start(index, Reason.OPERATOR, at)

    def _start(self, index: int, reason: Reason, at: int) -> None:
        self.cur, self.pos, self.last, self.dropped = index, 0, index, -1
        self.fade_left = self.fade_total = 0
        self.fade_reason = Reason.FADED
        if self.state != State.PANIC:
            self.state = State.PLAYING
        self._post(Event.START, index, reason, at)

    def _stop(self, reason: Reason, at: int) -> None:
        self._post(Event.STOP, self.cur, reason, at)
        self.cur = -1
        self.pos = self.fade_left = self.fade_total = 0
        if self.state != State.PANIC:
            self.state = State.IDLE

    def _start_fade(self, total: int, reason: Reason) -> None:
        """Fade the cue to zero at full scale per ``total`` frames; a running fade only speeds up.

        The level never rises: a faster fade keeps the level (its frames left are
        rounded down).
        """
        if self.state != State.PANIC:
            self.state = State.FADING
        if self.fade_total > 0:
            left = (self.fade_left * total) // self.fade_total
            if left >= self.fade_left:
                return
            self.fade_left = left
        else:
            self.fade_left = total
        self.fade_total = total
        self.fade_reason = reason

    def _drop_pending(self) -> None:
        if self.pending >= 0:
            self.dropped = self.pending
        self.pending = -1

    def _post(self, kind: Event, index: int, reason: Reason, at: int = 0) -> None:
        """An event at frame ``at`` of this block, with the fader as it was then (for the log)."""
        self.ring.post(kind, index, self.frames_total + at, reason, self.fader_target)
