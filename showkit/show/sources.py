"""The sound of a cue at unit gain: audio passages, tones, glides and pauses.

A generated cue (tone, glide, pause) is at most
:data:`showkit.limits.MAX_GENERATED_S` long: it is held whole in memory for
locking and rendering.  Tones and glides are made at 48 kHz with a peak of 1.0 (0 dBFS) before the
cue's gain (:mod:`showkit.analysis.signals`: an exponential glide, raised-cosine fades); a tone
on a mode lands on the rig's mode frequency.

A check, render or run pass builds each cue's signal once: the pass holds a
:class:`SignalMemo` and every step (check, relock, render) asks it for the
signal.  Its key is everything :func:`cue_signal` reads (:func:`signal_key`), so
a signal is never reused for another sound, passage, fade or rig.
"""

from __future__ import annotations

import hashlib
import os
from collections import OrderedDict
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from showkit.analysis.signals import TONE_RATE_HZ, fade, glide, tone
from showkit.errors import AudioError, SheetError
from showkit.limits import MAX_GENERATED_S
from showkit.rigfile import Rig
from showkit.show.sheet import AudioSource, Cue, GlideSource, PauseSource, Sheet, ToneSource



@dataclass(frozen=True)
class CueSignal:
    """A cue's samples at unit gain with its fades.

    ``samples``: mono float64, 1.0 = full scale; ``rate_hz``; ``source_hash``:
    SHA-256 (16 hex) of the samples and rate; ``frequency_hz``/``to_frequency_hz``
    for tones and glides.
    """

    samples: np.ndarray
    rate_hz: int
    source_hash: str
    frequency_hz: float | None = None
    to_frequency_hz: float | None = None

    @property
    def duration_s(self) -> float:
        return self.samples.size / self.rate_hz

    @property
    def silent(self) -> bool:
        """True when every sample is zero (a pause): the cue plays nothing at any gain."""
        return not np.any(self.samples)


@lru_cache(maxsize=16)
def _modes(rig: Rig):
    from showkit.physics.modes import find_modes

    return {m.n: m for m in find_modes(rig.model)}


def mode_frequency_hz(rig: Rig, n: int, where: str) -> float:
    """The rig's mode ``n`` frequency, Hz, or a SheetError naming the cue."""
    modes = _modes(rig)
    if n not in modes:
        have = ", ".join(str(k) for k in sorted(modes))
        raise SheetError(f"the rig has no mode {n}", where, f"use one of the modes {have} (see showkit modes)")
    return modes[n].frequency_hz


def _check_frequency(rig: Rig, f: float, where: str) -> float:
    limit = rig.model.plane_wave_limit_hz
    if f >= limit:
        raise SheetError(f"{f:.0f} Hz is above the tube's plane-wave limit ({limit:.0f} Hz)", where,
                         "choose a lower frequency: the model says nothing above the limit")
    return f


def _hash(samples: np.ndarray, rate_hz: int) -> str:
    digest = hashlib.sha256(np.ascontiguousarray(samples, dtype=np.float32).tobytes())
    digest.update(str(int(rate_hz)).encode())
    return digest.hexdigest()[:16]


def cue_signal(sheet: Sheet, rig: Rig, cue: Cue) -> CueSignal:
    """The cue's sound at unit gain, with its fades, ready to lock or render."""
    from showkit.analysis.audio import load_audio
    where = f"{sheet.path or 'sheet'}: cue {cue.id}"
    s = cue.source
    f1 = f2 = None
    if not isinstance(s, AudioSource) and not s.duration_s <= MAX_GENERATED_S:
        raise SheetError(f"a {s.kind} of {s.duration_s:g} s is longer than showkit makes "
                         f"({MAX_GENERATED_S:g} s)", f"{where}: {s.kind}.duration",
                         "split it into several cues (see Limits in the README)")
    if isinstance(s, AudioSource):
        path = sheet.audio_path(s)
        try:
            audio = load_audio(path, None, s.start_s, s.end_s)
        except AudioError as exc:
            raise SheetError(exc.what, f"{where}: audio ({path})", exc.fix) from None
        samples, rate = audio.samples, audio.rate_hz
    elif isinstance(s, ToneSource):
        f1 = (mode_frequency_hz(rig, s.mode, f"{where}: tone.mode") if s.mode is not None
              else s.frequency_hz)
        _check_frequency(rig, f1, f"{where}: tone")
        samples, rate = tone(f1, s.duration_s), TONE_RATE_HZ
    elif isinstance(s, GlideSource):
        f1 = (mode_frequency_hz(rig, s.from_mode, f"{where}: glide.from_mode") if s.from_mode is not None
              else s.from_frequency_hz)
        f2 = (mode_frequency_hz(rig, s.to_mode, f"{where}: glide.to_mode") if s.to_mode is not None
              else s.to_frequency_hz)
        _check_frequency(rig, max(f1, f2), f"{where}: glide")
        samples, rate = glide(f1, f2, s.duration_s), TONE_RATE_HZ
    elif isinstance(s, PauseSource):
        samples, rate = np.zeros(int(round(s.duration_s * TONE_RATE_HZ))), TONE_RATE_HZ
    else:  # pragma: no cover
        raise TypeError(s)
    if samples.size == 0:
        raise SheetError("the cue holds no samples", where, "give it a longer duration or passage")
    samples = fade(samples, rate, cue.fade_in_s, cue.fade_out_s, where)
    samples.setflags(write=False)  # shared by the steps of a pass (SignalMemo): nobody may change it
    return CueSignal(samples, int(rate), _hash(samples, rate), f1, f2)


#: The most samples a :class:`SignalMemo` keeps, all signals together (float64: 128 MiB,
#: 5.8 min of audio at 48 kHz); beyond it the least recently used signals are let go.
MEMO_MAX_SAMPLES = 2 ** 24


def signal_key(sheet: Sheet, rig: Rig, cue: Cue):
    """Everything :func:`cue_signal` reads for this cue, as a hashable key (None: do not memoise).

    An audio passage: its file (resolved path, size and modification time in ns), its
    start and end and the fades; the rig plays no part.  A pause: its duration and the
    fades.  A tone or glide: its source as written (mode or frequency, duration), the
    fades and the whole rig (a mode's frequency and the plane-wave limit follow the tube
    and its gas; the rig's conditions are in it too, more than the sound needs).  The cue's id is not in the
    key: two cues of the same sound share it.  None when the file cannot be read (the
    build then reports why).
    """
    s = cue.source
    fades = (float(cue.fade_in_s), float(cue.fade_out_s))
    if isinstance(s, AudioSource):
        try:
            path = sheet.audio_path(s).resolve()
            st = os.stat(path)
        except (OSError, RuntimeError, ValueError):
            return None
        return ("audio", str(path), st.st_size, st.st_mtime_ns, s.start_s, s.end_s, fades)
    if isinstance(s, PauseSource):
        return ("pause", s, fades)
    return (type(s).__name__, s, fades, rig)


class SignalMemo:
    """The signals of one pass (check, render, run, lock), each built once.

    :meth:`get` returns the signal :func:`cue_signal` would build, from memory when
    a signal with the same :func:`signal_key` was built in this pass.  A failed build
    is not kept (the next request tries again and reports the same error).  At most
    ``max_samples`` samples are kept (least recently used let go first).  Make one per
    pass and drop it after: a file changed on disk during the pass changes the key.

    Parameters
    ----------
    max_samples : int
        The most samples kept, all signals together (count, not bytes).
    """

    def __init__(self, max_samples: int = MEMO_MAX_SAMPLES):
        self.max_samples = int(max_samples)
        self._signals: OrderedDict = OrderedDict()
        self._held = 0

    def get(self, sheet: Sheet, rig: Rig, cue: Cue) -> CueSignal:
        """The cue's signal at unit gain with its fades (:func:`cue_signal`), built at most once."""
        key = signal_key(sheet, rig, cue)
        if key is None:
            return cue_signal(sheet, rig, cue)
        found = self._signals.get(key)
        if found is not None:
            self._signals.move_to_end(key)
            return found
        signal = cue_signal(sheet, rig, cue)
        if signal.samples.size <= self.max_samples:
            self._signals[key] = signal
            self._held += signal.samples.size
            while self._held > self.max_samples:
                _, old = self._signals.popitem(last=False)
                self._held -= old.samples.size
        return signal

    def __len__(self) -> int:
        return len(self._signals)


def signal_for(sheet: Sheet, rig: Rig, cue: Cue, signals: SignalMemo | None = None) -> CueSignal:
    """The cue's signal, from ``signals`` when given (see :class:`SignalMemo`), else built."""
    if signals is None:
        return cue_signal(sheet, rig, cue)
    return signals.get(sheet, rig, cue)
