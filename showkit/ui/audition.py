"""Audition: play one rendered cue (already verified at its gain) through the audio device.

Uses the live engine (:mod:`showkit.show.engine`), which only ever scales a
rendered cue down.  Without PortAudio or a device, :meth:`Audition.play`
raises the engine's DeviceError, whose one line the UI shows.
"""

from __future__ import annotations

from showkit.show.status import State


class Audition:
    """At most one cue playing at a time."""

    def __init__(self):
        self.engine = None
        self.cue_id: str | None = None

    def play(self, rendered, device=None) -> None:
        """Play a :class:`showkit.show.render.RenderedCue` (stops anything playing).

        ``device``: the output device (None: the system default; an index or part of a name).
        """
        from dataclasses import replace

        from showkit.show.engine import Engine

        self.stop()
        # One cue, no follow-on; everything else (verify_at: checked again at the rate played) kept.
        cue = replace(rendered, then="wait")
        engine = Engine([cue])
        engine.open(device=device)
        engine.go(0)
        self.engine, self.cue_id = engine, rendered.id

    def poll(self) -> str | None:
        """A line for the status bar: what is playing, or how it ended (None when idle)."""
        if self.engine is None:
            return None
        events = self.engine.poll()
        st = self.engine.status()
        ended = [e for e in events if e.kind in ("stop", "device_error", "panic")]
        if ended or st.state in (State.FAULT, State.PANIC, State.CLOSED):
            text = st.message or (ended[-1].detail if ended else st.state)
            self.stop()
            return f"audition: {text}"
        if st.state == State.PLAYING:
            return f"playing {st.cue_id}: {st.elapsed_s:.1f} s, {st.left_s:.1f} s left -- esc stops it (panic)"
        return None

    @property
    def playing(self) -> bool:
        return self.engine is not None

    def stop(self) -> None:
        if self.engine is not None:
            engine, self.engine, self.cue_id = self.engine, None, None
            try:
                engine.panic()
            finally:
                engine.close()
