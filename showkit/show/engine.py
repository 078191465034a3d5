"""The playback engine: plays rendered cues live through the audio device.

The engine plays a list of :class:`~showkit.show.playlist.RenderedCue` (already
at their locked gains, fades applied, verified against the pressure model) and
only ever scales them *down*: every output sample is the rendered sample times a
gain in [0, 1] -- the operator fader, times a fade-out ramp, times the panic
ramp.  So no output sample is ever above the rendered cue's level at that position.

Layers
------
The audio callback's state machine, its buffers and its event ring are the
:class:`~showkit.show.mixer.Mixer` (no I/O, no text).  This module is what sits
on top of it: the sounddevice stream (open, reopen, close, device faults), the
operator's keys (which it checks, refusing with a reason, before passing them on
as requests) and the show log's texts (written on the operator's thread by the
keys and by :meth:`Engine.poll`, which drains the mixer's ring).  The audio
callback (:meth:`Engine.render_into`) only calls the mixer.

How to use it (the API the terminal runner and the UI call)
------------------------------------------------------------
::

    from showkit.show.engine import Engine
    from showkit.show.showlog import ShowLog

    log = ShowLog("show.jsonl")                 # or ShowLog() for the default file
    engine = Engine(cues, log=log)              # cues: list[RenderedCue] in show order
    engine.open(device=None)                    # device: None, an index or part of a name;
                                                # negotiates the rate, resamples if needed;
                                                # raises DeviceError with what to do
    engine.go()                                 # start the next cue (or engine.go(index));
                                                # raises CueRefused for a stale/over cue,
                                                # after panic, or past the last cue
    engine.fade_out()                           # fade the current cue to silence (fade_s)
    engine.set_fader_db(-3.0)                   # operator fader, dB <= 0 (set_fader(level)
    engine.fader_step(-1.0)                     # for 0..1); above unity raises FaderRefused
    engine.panic()                              # silence within panic_s (20 ms), disarms
    engine.rearm()                              # after panic: allow go() again
    events = engine.poll()                      # call every 50-100 ms: drains the callback's
                                                # events into the log, checks the device;
                                                # returns list[EngineEvent]
    st = engine.status()                        # EngineStatus: state, cue, next (the next
                                                # playable cue; skipped_ids passed over),
                                                # elapsed_s, left_s, fader_db, message
    engine.reopen()                             # after a device fault: reconnect; the show
                                                # resumes with go() at the next cue
    engine.close()                              # ramp out, stop the stream

When today's conditions change during a show (the UI's manometer or temperature
keys), the caller withdraws the cues whose fit is no longer known at once
(``engine.withdraw(index, what, fix)``: go() refuses them and no cue follows on
into them), caps the fader for a cue playing above its new ceiling
(``engine.cap_fader_db(db)``), and, once the pre-show check has run again and
nothing plays, hands the engine the new rendered cues (``engine.replace_cues(cues)``,
the show position kept).

Tests (and a UI preview) may drive :meth:`Engine.render_into` directly with no
device: ``out = np.zeros((frames, 1), np.float32); engine.render_into(out, frames)``.

Faults
------
No PortAudio library or no device: :meth:`open` raises DeviceError (what to
install or connect).  A buffer underrun (the callback's ``output_underflow``
flag): the current cue is ramped out at once (cut ramp); a callback error: the
block is silenced and the cue dropped.  Either way the show stops, a
``device_error`` event says what happened and what to do, and ``go()`` resumes
at the next cue.  The device lost mid-show (the stream
ends by itself, or is no longer active): the output is gone, so it is silent;
``poll()`` reports it and :meth:`reopen` reconnects, the show resuming at the
next cue.

Timing: the panic ramp is ``panic_s`` (20 ms) of samples from the first
callback block after the key; with the default block of 512 frames at 48 kHz
(10.7 ms) the key-to-silence time at the callback is at most about 31 ms, plus
the device's own output latency.
"""

from __future__ import annotations

import math
import time
from collections import Counter
from dataclasses import dataclass

from showkit.errors import DeviceError, InputError, SheetError
from showkit.show.mixer import Event, Mixer, Reason
from showkit.show.status import State
from showkit.show.playlist import RenderedCue, resample_cues
from showkit.units import db, undb


class CueRefused(SheetError):
    """A cue cannot be started now (not ok, after panic, past the end)."""


class FaderRefused(InputError):
    """A fader move above the cue's locked gain (unity) was refused."""


#: The log's words for how a cue started or stopped.
_REASON_TEXT = {
    Reason.OPERATOR: "started on a go (the operator, or --auto)",
    Reason.FOLLOW: "followed on with no gap",
    Reason.END: "played to its end",
    Reason.FADED: "faded out",
    Reason.CUT: "cut for the next cue",
    Reason.PANIC: "panic: output silent",
    Reason.NEXT_REFUSED: "played to its end; the next cue may not be started",
    Reason.UNDERFLOW: "stopped after a buffer underrun",
    Reason.LAST: "played to its end; that was the last cue",
}


@dataclass(frozen=True)
class EngineEvent:
    """One thing that happened, for the screen (already written to the log).

    kind : str
        A show-log event name ("start", "stop", "fade", "fader", "panic", "device_error").
    cue : str or None
        The cue id.
    show_time_s : float or None
        Time in seconds since the stream started (audio clock), when known.
    detail : str
        What happened, and what to do where something went wrong.
    """

    kind: str
    cue: str | None
    show_time_s: float | None
    detail: str


@dataclass(frozen=True)
class EngineStatus:
    """A snapshot for the screen.

    state : State
        ``State.IDLE``, ``PLAYING``, ``FADING``, ``PANIC`` (silent, waiting for re-arm),
        ``FAULT`` (device problem) or ``CLOSED``; each member is its word ("idle", ...).
    cue_index, cue_id, cue_label : the cue playing (None when idle).
    next_index, next_id : the cue ``go()`` would start (None past the end).
    skipped_ids : the cues that may not be played, passed over to reach the next one.
    elapsed_s, left_s : seconds into and left in the current cue (0 when idle).
    fader_db : the operator fader in dB (<= 0; -inf at zero).
    message : a line for the status bar (the last fault and what to do, or "").
    """

    state: State
    cue_index: int | None
    cue_id: str | None
    cue_label: str | None
    next_index: int | None
    next_id: str | None
    skipped_ids: tuple
    elapsed_s: float
    left_s: float
    fader_db: float
    message: str
    rate_hz: int


class Engine:
    """Plays rendered cues through a sounddevice OutputStream; see the module docstring.

    Parameters
    ----------
    cues : list of RenderedCue
        The show, in order.  Cues at other rates are resampled to the first's.
    log : ShowLog, optional
        Where events go (written on the operator's thread by :meth:`poll` and the key methods).
    auto : bool
        Rehearsal: treat every cue's ``then`` as "next".
    fade_s : float
        Fade-out time of the fade key, s.
    panic_s : float
        Panic ramp to silence, s (at most 0.05).
    cut_s : float
        Ramp used to cut a cue for the next one, or after an underrun, s.
    fader_slew_s : float
        Time for the fader to travel full range, s (fader moves are ramped, no clicks).
    block_frames : int
        Frames per callback block asked of the device.
    max_block_frames : int
        Size of the preallocated work buffers; longer blocks are processed in pieces.
    stall_s : float
        A stream that takes no samples for this long while a cue plays is a device fault, s.
    """

    def __init__(self, cues: list[RenderedCue], *, log=None, auto: bool = False,
                 fade_s: float = 3.0, panic_s: float = 0.02, cut_s: float = 0.02,
                 fader_slew_s: float = 0.03, block_frames: int = 512,
                 max_block_frames: int = 4096, stall_s: float = 2.0):
        if not cues:
            raise InputError("the show has no cues", "show", "add cues to the sheet")
        if not 0 < panic_s <= 0.05:
            raise InputError(f"panic ramp must be above 0 and at most 50 ms (got {panic_s} s)",
                             "panic_s", "use 0.02")
        if not fade_s > 0 or not cut_s > 0 or not fader_slew_s > 0:
            raise InputError("fade, cut and fader times must be above zero", "engine",
                             "give times in seconds above zero")
        self.log = log
        self.auto = bool(auto)
        self.fade_s = float(fade_s)
        self.panic_s = float(panic_s)
        self.cut_s = float(cut_s)
        self.fader_slew_s = float(fader_slew_s)
        self.block_frames = int(block_frames)
        self.stall_s = float(stall_s)
        self.mixer = Mixer(max_block_frames)
        self._watch_frames = 0
        self._watch_t = 0.0
        self._backlog: list[EngineEvent] = []
        self._stream = None
        self._generation = 0
        self._stream_finished = False
        self._closing = False
        self._device = None
        self.fault = ""
        self.note = ""
        self._source_cues = list(cues)
        self._withdrawn: dict[int, tuple[str, str]] = {}
        self._fader_cap = 1.0
        self._prepare(_show_rate(cues))

    def _prepare(self, rate_hz: int) -> None:
        """Resample (ahead of time, from the cues as given) and load the mixer at ``rate_hz``."""
        self.cues = resample_cues(self._source_cues, rate_hz)
        self.rate_hz = int(rate_hz)
        self.mixer.load([c.samples for c in self.cues], [c.playable for c in self.cues],
                        [self.auto or c.then == "next" for c in self.cues],
                        panic_frames=max(1, int(math.floor(self.panic_s * rate_hz))),
                        cut_frames=max(1, int(round(self.cut_s * rate_hz))),
                        fader_slew_frames=max(1, int(round(self.fader_slew_s * rate_hz))))

    @property
    def _last(self) -> int:
        """The last cue started (-1 for none); tests read it."""
        return self.mixer.last

    # ----------------------------------------------------------- device stream
    def open(self, device=None, *, stream_factory=None, latency="low") -> None:
        """Open and start the output stream on ``device`` (None, an index or part of a name).

        The rate is the cues' when the device takes it, else the device's default,
        the cues being resampled to it first.  ``stream_factory`` (tests) replaces
        ``sounddevice.OutputStream``.  Raises DeviceError with what to do.
        """
        from showkit.show import devices

        sd = devices.import_sounddevice()
        dev = devices.choose_device(device, sd)
        rate = devices.negotiate_rate(dev, self.rate_hz, sd)
        if rate != self.rate_hz:
            self._prepare(rate)
        self._device = dev
        factory = stream_factory or sd.OutputStream
        self._stream_finished = False
        self._closing = False
        self._generation += 1
        generation = self._generation
        try:
            stream = factory(device=dev.index, samplerate=rate, channels=1, dtype="float32",
                             blocksize=self.block_frames, latency=latency,
                             callback=self._sd_callback,
                             finished_callback=lambda: self._on_finished(generation))
            stream.start()
        except Exception as exc:  # PortAudioError and friends
            self._device_error(f"cannot open output device {dev.index} ({dev.name}): {exc}",
                               "check the device is connected and not used by another program, "
                               "or choose another with --device (see `showkit devices`)")
            raise DeviceError(f"cannot open output device {dev.index} ({dev.name}): {exc}",
                              "--device", "check the connection, or choose another device "
                              "(`showkit devices`)") from None
        self._stream = stream
        self._watch_t = time.monotonic()
        self.fault = ""

    @property
    def device(self):
        """The :class:`~showkit.show.devices.OutputDevice` in use (None before open)."""
        return self._device

    def _sd_callback(self, outdata, frames, time_info, status) -> None:
        """sounddevice's callback: status flags, then :meth:`render_into`."""
        try:
            if status and status.output_underflow:
                self.mixer.underflow()
            self.render_into(outdata, frames)
        except Exception:  # never let the audio thread die noisily: silence and report
            outdata.fill(0.0)
            self.mixer.fail()

    def render_into(self, outdata, frames: int) -> None:
        """Fill ``outdata[:frames]`` (shape (frames, channels), float32) with the show.

        The audio callback's work, done by :meth:`showkit.show.mixer.Mixer.render`
        (preallocated buffers, no lock, nothing logged).  Tests and previews may call
        it directly with no device.
        """
        self.mixer.render(outdata, frames)

    def _on_finished(self, generation: int) -> None:
        if generation == self._generation:  # an old stream ending late does not count
            self._stream_finished = True

    def _stream_lost(self) -> bool:
        if self._stream is None or self._closing:
            return False
        if self._stream_finished:
            return True
        try:
            return not bool(self._stream.active)
        except Exception:
            return True

    def reopen(self, device=None) -> None:
        """After a device fault: close what is left and open the device again (or ``device``)."""
        self._drop_stream()
        self.mixer.drop()  # anything playing was lost with the device: resume at the next cue
        spec = device if device is not None else (self._device.index if self._device else None)
        try:
            self.open(spec)
        except DeviceError:
            if device is None and spec is not None:
                self.open(None)  # the old index may have gone; try the default
            else:
                raise

    def _drop_stream(self) -> None:
        stream, self._stream = self._stream, None
        if stream is not None:
            self._closing = True
            try:
                stream.abort()
            except Exception:
                pass
            try:
                stream.close()
            except Exception:
                pass

    def close(self) -> None:
        """Ramp out what is playing (cut ramp), then stop and close the stream."""
        if self._stream is not None and self.mixer.cur >= 0 and not self._stream_lost():
            self.mixer.request_cut()
            deadline = time.monotonic() + 0.5
            while self.mixer.cur >= 0 and time.monotonic() < deadline:
                time.sleep(0.005)
        self.poll()
        self._drop_stream()

    # --------------------------------------------------------- operator's keys
    @property
    def next_index(self) -> int | None:
        """The cue ``go()`` starts: the first playable one after the last started or requested.

        Cues that may not be played (stale, over, error) are passed over; :attr:`skipped`
        names them.  None past the end.
        """
        index = self.mixer.next_start()
        while index < len(self.cues) and not self.mixer.may_start(index):
            index += 1
        return index if index < len(self.cues) else None

    @property
    def skipped(self) -> list[int]:
        """Indexes of the not-playable cues that ``go()`` would pass over to reach the next one."""
        out = []
        index = self.mixer.next_start()
        while index < len(self.cues) and not self.mixer.may_start(index):
            out.append(index)
            index += 1
        return out

    def go(self, index: int | None = None) -> int:
        """Start cue ``index`` (default: the next cue); returns the index.

        A cue playing is cut (``cut_s`` ramp) and the new one starts after it.
        Raises CueRefused when the cue is not ok, after panic until :meth:`rearm`,
        past the last cue, or while the device is faulty.
        """
        if index is None:
            index = self.next_index
            if index is None:
                raise CueRefused("there is no next cue: the show is over", "show",
                                 "quit, or pick a cue by number to play it again")
        if not 0 <= index < len(self.cues):
            raise CueRefused(f"there is no cue number {index + 1}", "show",
                             f"pick 1 to {len(self.cues)}")
        if self.mixer.disarmed():
            raise CueRefused("panic stopped the show", "show",
                             "re-arm when it is safe, then start the next cue")
        if self.fault or self._stream_lost():
            raise CueRefused(f"the audio device has a fault: {self.fault or 'stream stopped'}",
                             "audio", "reconnect the device, then resume at the next cue")
        cue = self.cues[index]
        if not cue.playable:
            what, fix = cue.refusal_parts()
            raise CueRefused(what, f"cue {cue.id!r}", f"{fix}; or skip it and start the one after")
        if index in self._withdrawn or not self.mixer.may_start(index):
            what, fix = self._withdrawn.get(index, ("the cue was withdrawn", "check the show again"))
            raise CueRefused(what, f"cue {cue.id!r}", f"{fix}; or skip it and start the one after")
        self.note = ""
        self._fader_cap = 1.0  # a cap set for the cue that played does not carry to a new go
        self._watch_t = time.monotonic()
        self.mixer.request_go(index)
        return index

    def fade_out(self, seconds: float | None = None) -> None:
        """Fade the current cue to silence over ``seconds`` (default ``fade_s``), then stop it."""
        seconds = self.fade_s if seconds is None else float(seconds)
        if not seconds > 0:
            raise InputError("a fade must last more than zero seconds", "fade", "give e.g. 3 s")
        cue = self._playing()
        if cue is None:
            raise CueRefused("nothing is playing to fade", "show", "start a cue first")
        self.mixer.request_fade(max(1, int(round(seconds * self.rate_hz))))
        self._write("fade", cue.id, self._gain_db(cue), f"fade out over {seconds:g} s")

    def set_fader(self, level: float) -> None:
        """Operator fader as a multiplier, 0 to 1 (1 = the cue's locked gain); above 1 is refused."""
        level = float(level)
        if not math.isfinite(level) or level > 1.0:
            raise FaderRefused(f"the fader cannot go above the cue's locked gain (asked {db(level):+.1f} dB)"
                               if math.isfinite(level) and level > 0 else
                               f"the fader level must be a number from 0 to 1 (got {level!r})",
                               "fader", "the locked gain is the most a cue may play at; to go "
                               "higher, raise the gain in the sheet and re-lock it")
        if level < 0:
            raise FaderRefused(f"the fader level cannot be negative (got {level:g})", "fader",
                               "give 0 (silent) to 1 (the locked gain)")
        if level > self._fader_cap * (1 + 1e-9):
            raise FaderRefused(f"the fader is held at {_fmt_db(db(self._fader_cap))}: the cue playing is "
                               "above today's ceiling", "fader",
                               "fade it out; the next cue plays at its own checked gain")
        self.mixer.set_fader(level)
        cue = self._playing()
        self._write("fader", cue.id if cue else None, self._gain_db(cue) if cue else None,
                    f"fader {_fmt_db(db(level))}")

    def set_fader_db(self, fader_db: float) -> None:
        """Operator fader in dB relative to the locked gain (<= 0; -inf for silent)."""
        fader_db = float(fader_db)
        if fader_db > 0:
            raise FaderRefused(f"the fader cannot go above the cue's locked gain (asked {fader_db:+.1f} dB)",
                               "fader", "the locked gain is the most a cue may play at; to go "
                               "higher, raise the gain in the sheet and re-lock it")
        self.set_fader(0.0 if fader_db == -math.inf else min(1.0, undb(fader_db)))

    def fader_step(self, step_db: float) -> float:
        """Move the fader by ``step_db`` dB; returns the new fader dB.  Past 0 dB is refused.

        Going down from -60 dB goes to silence; coming up from silence starts at -60 dB.
        """
        current = self.fader_db
        if step_db > 0 and current >= -1e-9:
            raise FaderRefused("the fader is at the cue's locked gain and cannot go higher",
                               "fader", "the locked gain is the most a cue may play at")
        if step_db > 0 and self._fader_cap < 1.0 and current >= db(self._fader_cap) - 1e-9:
            raise FaderRefused(f"the fader is held at {_fmt_db(db(self._fader_cap))}: the cue playing is "
                               "above today's ceiling", "fader",
                               "fade it out; the next cue plays at its own checked gain")
        if current == -math.inf:
            new = -math.inf if step_db <= 0 else -60.0
        else:
            new = min(0.0, db(self._fader_cap), current + step_db)
            if new < -60.0:
                new = -math.inf
        self.set_fader_db(new)
        return new

    @property
    def fader_db(self) -> float:
        """The fader setting in dB (<= 0, -inf at zero)."""
        return db(self.mixer.fader_target)

    def startable(self, index: int) -> bool:
        """True when cue ``index`` may be started now (ok, and not withdrawn)."""
        return self.mixer.may_start(index) and index not in self._withdrawn

    def withdraw(self, index: int, what: str, fix: str) -> None:
        """Cue ``index`` may not be started from now on (today's conditions changed).

        Takes effect at once for :meth:`go` and for a follow-on from the cue before
        (the callback reads the same flag).  A cue playing is not stopped here: the
        caller caps the fader (:meth:`cap_fader_db`) or fades it out.  Logged as a
        ``check`` event.
        """
        self.mixer.withhold(index)
        self._withdrawn[index] = (what, fix)
        cue = self.cues[index]
        self._write("check", cue.id, cue.gain_db, f"withdrawn: {what}")

    def cap_fader_db(self, fader_db: float, why: str) -> float:
        """Hold the fader at or below ``fader_db`` (<= 0) until the next go; returns the fader dB.

        For a cue playing above a ceiling that came down while it played: the fader
        moves down at once (the usual 30 ms ramp) and cannot be brought back up.
        """
        level = 0.0 if fader_db == -math.inf else min(1.0, undb(min(0.0, float(fader_db))))
        self._fader_cap = min(self._fader_cap, level)
        if self.mixer.fader_target > self._fader_cap:
            self.mixer.set_fader(self._fader_cap)
            cue = self._playing()
            self._write("fader", cue.id if cue else None, self._gain_db(cue) if cue else None,
                        f"fader {_fmt_db(db(self._fader_cap))}: {why}")
        return self.fader_db

    def replace_cues(self, cues: list[RenderedCue]) -> None:
        """The same show rendered again (a new pre-show check), the show position kept.

        Only while nothing plays, and only for the same cue ids in the same order
        (otherwise make a new engine).  The cues are resampled to the device's rate
        ahead of time, as at :meth:`open`; withdrawals end (the new cues carry their
        own status) and so does a fader cap.
        """
        if self.busy:
            raise CueRefused("a cue is playing", "show", "fade it out first")
        if [c.id for c in cues] != [c.id for c in self._source_cues]:
            raise InputError("the cues are not the same show", "show", "make a new engine for them")
        self._source_cues = list(cues)
        self._withdrawn = {}
        self._fader_cap = 1.0
        self._prepare(self.rate_hz)

    def panic(self) -> None:
        """Silence within ``panic_s`` from any state, and stop the show until :meth:`rearm`."""
        self.mixer.request_panic()
        cue = self._playing()
        self._write("panic", cue.id if cue else None, None,
                    f"panic key: ramp to silence in {self.panic_s * 1000:.0f} ms; "
                    "the show is stopped until re-armed")

    def rearm(self) -> None:
        """Allow cues to start again after a panic; the show resumes at the next cue."""
        self.mixer.request_arm()
        if self._stream is None:  # no callback to serve the request: serve it here
            self.mixer.serve_requests()
        self._write("check", None, None, "re-armed after panic; next cue: "
                    f"{self.cues[self.next_index].id if self.next_index is not None else 'none'}")

    def _playing(self) -> RenderedCue | None:
        cur = self.mixer.cur
        return self.cues[cur] if cur >= 0 else None

    # --------------------------------------------------------- status, events
    def status(self) -> EngineStatus:
        """A snapshot of the engine for the screen."""
        m = self.mixer
        cur, pos = m.cur, m.pos
        if self._stream is None and self._device is not None and not self.fault:
            state = State.CLOSED
        elif self.fault:
            state = State.FAULT
        else:
            state = m.shown_state()
        nxt = self.next_index
        cue = self.cues[cur] if cur >= 0 else None
        elapsed = min(pos, cue.frames) / self.rate_hz if cue else 0.0
        left = max(0, cue.frames - pos) / self.rate_hz if cue else 0.0
        return EngineStatus(state=state, cue_index=cur if cue else None,
                            cue_id=cue.id if cue else None, cue_label=cue.label if cue else None,
                            next_index=nxt, next_id=self.cues[nxt].id if nxt is not None else None,
                            skipped_ids=tuple(self.cues[k].id for k in self.skipped),
                            elapsed_s=elapsed, left_s=left, fader_db=self.fader_db,
                            message=self.fault or self.note, rate_hz=self.rate_hz)

    @property
    def busy(self) -> bool:
        """True while a cue plays, a request is not yet served, or a panic ramp runs."""
        return self.mixer.busy()

    def poll(self) -> list[EngineEvent]:
        """Drain the callback's events into the log and check the device; returns them.

        The operator's own actions (fade, fader, panic, re-arm) are logged when they
        are made and are not returned here.
        """
        self._drain_ring()
        out, self._backlog = self._backlog, []
        lost = self._stream_lost()
        stalled = False
        if self._stream is not None and not lost and not self.fault:
            now = time.monotonic()
            frames = self.mixer.frames_total
            if not self.busy or frames != self._watch_frames:
                self._watch_frames = frames
                self._watch_t = now
            elif now - self._watch_t > self.stall_s:
                stalled = True
        if (lost or stalled) and not self.fault:
            self._drop_stream()  # a stalled stream must not wake up and play on by itself
            self._drain_ring()
            out += self._backlog
            self._backlog = []
            cue = self._playing()
            self.mixer.drop()
            what = ("the audio device stopped taking samples" if stalled else
                    "the audio device stopped (disconnected or taken by another program)")
            self._device_error(what, "the output is silent: reconnect the device, then resume at "
                               "the next cue (reconnect key, or restart the run)", cue=cue, sink=out)
        return out

    def _drain_ring(self) -> None:
        """Move the callback's events into the log and the backlog that :meth:`poll` returns."""
        lost, rows = self.mixer.ring.drain()
        if lost:
            self._backlog.append(self._emit("device_error", None, None, f"{lost} engine events "
                                            "were lost (the screen was not polled in time)"))
        for kind, index, frame, reason, fader in rows:
            self._backlog.append(self._event_from_ring(int(kind), int(index), frame / self.rate_hz,
                                                       int(reason), fader))

    def _event_from_ring(self, kind, index, t, reason, fader=None) -> EngineEvent:
        cue = self.cues[index] if 0 <= index < len(self.cues) else None
        cue_id = cue.id if cue else None
        if kind == Event.START:
            return self._emit("start", cue_id, self._gain_db(cue, fader), _REASON_TEXT[reason], t)
        if kind == Event.STOP:
            detail = _REASON_TEXT.get(reason, "stopped")
            if reason == Reason.NEXT_REFUSED and index + 1 < len(self.cues):
                detail += f": {self.cues[index + 1].refusal()}"
            return self._emit("stop", cue_id, self._gain_db(cue, fader), detail, t)
        if kind == Event.UNDERFLOW:
            self.note = ("buffer underrun: the cue was ramped out -- start the next cue to resume; "
                         "if it repeats, close other programs or choose another device")
            return self._emit("device_error", cue_id, None,
                              "buffer underrun: the device ran out of samples, so the cue was "
                              "ramped out and the show stopped; start the next cue to resume; if it "
                              "repeats, close other programs or choose another device", t)
        return self._emit("device_error", cue_id, None,
                          "the audio callback failed, the output was silenced; start the next "
                          "cue to resume, and report this as a bug if it repeats", t)

    def _device_error(self, what: str, fix: str, cue=None, sink=None) -> None:
        self.fault = f"{what} -- {fix}"
        event = self._emit("device_error", cue.id if cue else None, None, self.fault)
        if sink is not None:
            sink.append(event)

    def _emit(self, kind, cue_id, gain_db, detail, t=None) -> EngineEvent:
        self._write(kind, cue_id, gain_db, detail)
        return EngineEvent(kind, cue_id, t, detail)

    def _write(self, kind, cue_id, gain_db, detail) -> None:
        if self.log is not None:
            if kind in ("fade", "fader", "panic", "check"):
                self._drain_ring()  # keep the log in the order things happened
            self.log.write(kind, cue_id, gain_db, detail)

    def _gain_db(self, cue, fader_level: float | None = None) -> float | None:
        """The cue's gain with the fader (now, or the level given), dB."""
        if cue is None:
            return None
        fader = self.fader_db if fader_level is None else db(fader_level)
        return cue.gain_db + fader if math.isfinite(fader) else None


def _show_rate(cues) -> int:
    """The rate the show runs at: the most common among the playable cues (the higher on a tie)."""
    rates = Counter(c.rate_hz for c in cues if c.playable and c.frames) or Counter(c.rate_hz for c in cues)
    return max(rates, key=lambda r: (rates[r], r))


def _fmt_db(value: float) -> str:
    return "silent (-inf dB)" if value == -math.inf else f"{value:+.1f} dB"
