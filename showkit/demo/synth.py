"""The demo pieces: short original tracks made by simple synthesis.

Four pieces, written so that the scan has something to tell apart (the README's
"The demo audio" says what each is):

- ``ember_steps``   sustained tones on the demo rig's readable modes;
- ``lantern_drift`` the same kind of tones, written two semitones *above* the
  modes, so that the notes fall between modes and a shift of -2 semitones
  lays them back on;
- ``kettle_parade`` drum-like hits and noise bursts, no held notes;
- ``three_rooms``   three sections that change character at 12 s and 24 s:
  an on-mode pad, then hits, then a quick melody between the modes.

Everything is deterministic (fixed seeds, no clock), so
``python -m showkit.demo.synth [FOLDER]`` remakes the files in ``demo_audio/``
sample for sample.  Synthesis: additive partials and two-operator frequency
modulation (Chowning, J. Audio Eng. Soc. 21(7), 526-534, 1973) under
raised-cosine envelopes; hits are decaying pitch sweeps and shaped noise.
"""

from __future__ import annotations

import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable

import numpy as np

#: Sample rate of the demo files, Hz.
RATE_HZ = 44100

#: Mode frequencies of the bundled demo rig, Hz (from ``find_modes`` of the rig's best
#: estimate, the gas flowing out of the holes, since analysis version 3;
#: a test checks that they still agree with the model within 2 cents).  Frozen
#: here so that the files can be remade identically.
DEMO_MODE_HZ = {2: 114.015, 3: 171.102, 4: 228.008, 5: 284.745, 6: 341.329,
                7: 397.787, 8: 454.147}


@dataclass(frozen=True)
class Piece:
    """One demo piece and the truth it was written to.

    Attributes
    ----------
    name : str
        File stem in ``demo_audio/``.
    title : str
    kind : str
        ``"on-modes"``, ``"between-modes"``, ``"percussive"`` or ``"sections"``.
    duration_s : float
    render : callable
        ``render() -> ndarray`` of mono samples at :data:`RATE_HZ`.
    sections_s : tuple of float
        Times where the character changes, s (empty when it does not).
    offset_semitones : float
        How far the notes were written above the modes (0 for on-mode notes).
    modes : tuple of int
        The modes the on-mode notes are written on.
    """

    name: str
    title: str
    kind: str
    duration_s: float
    render: Callable[[], np.ndarray]
    sections_s: tuple = ()
    offset_semitones: float = 0.0
    modes: tuple = field(default_factory=tuple)

    @property
    def filename(self) -> str:
        return f"{self.name}.flac"


# --- building blocks (all vectorised over samples) ---------------------------

def envelope(n: int, rate_hz: int, attack_s: float, release_s: float) -> np.ndarray:
    """Raised-cosine attack and release over ``n`` samples (peak 1)."""
    env = np.ones(n)
    a = min(n // 2, int(attack_s * rate_hz))
    r = min(n - a, int(release_s * rate_hz))
    if a:
        env[:a] = 0.5 - 0.5 * np.cos(np.pi * np.arange(a) / a)
    if r:
        env[n - r:] *= 0.5 + 0.5 * np.cos(np.pi * np.arange(1, r + 1) / r)
    return env


def additive_tone(freq_hz: float, duration_s: float, rate_hz: int = RATE_HZ,
                  partials=((1, 1.0), (2, 0.08), (3, 0.03)), attack_s: float = 0.15,
                  release_s: float = 0.3, phase: float = 0.0) -> np.ndarray:
    """A held tone: harmonic partials ``(multiple, amplitude)`` under an envelope.

    Parameters
    ----------
    freq_hz : float
        Fundamental, Hz.
    duration_s : float
        Length including attack and release, s.
    rate_hz : int
        Sample rate, Hz.
    partials : sequence of (int, float)
        Harmonic number and relative amplitude.
    attack_s, release_s : float
        Raised-cosine ramps, s.
    phase : float
        Starting phase, rad.
    """
    n = int(round(duration_s * rate_hz))
    t = np.arange(n) / rate_hz
    wave = sum(a * np.sin(2 * np.pi * k * freq_hz * t + k * phase) for k, a in partials)
    return wave * envelope(n, rate_hz, attack_s, release_s)


def fm_tone(freq_hz: float, duration_s: float, rate_hz: int = RATE_HZ, ratio: float = 2.0,
            index: float = 0.8, attack_s: float = 0.02, release_s: float = 0.12) -> np.ndarray:
    """Two-operator FM tone, ``sin(2 pi f t + I e(t) sin(2 pi r f t))`` (Chowning 1973).

    Parameters
    ----------
    freq_hz : float
        Carrier, Hz.
    ratio : float
        Modulator / carrier frequency.
    index : float
        Peak modulation index (rad); it decays with the envelope.
    """
    n = int(round(duration_s * rate_hz))
    t = np.arange(n) / rate_hz
    env = envelope(n, rate_hz, attack_s, release_s)
    decay = np.exp(-t / max(duration_s, 1e-3))
    return env * np.sin(2 * np.pi * freq_hz * t + index * decay * np.sin(2 * np.pi * ratio * freq_hz * t))


def kick(rate_hz: int = RATE_HZ, start_hz: float = 150.0, end_hz: float = 45.0,
         decay_s: float = 0.18, length_s: float = 0.45) -> np.ndarray:
    """A drum-like hit: a sine sweeping down from ``start_hz`` to ``end_hz``, decaying."""
    n = int(length_s * rate_hz)
    t = np.arange(n) / rate_hz
    freq = end_hz + (start_hz - end_hz) * np.exp(-t / 0.04)
    phase = 2 * np.pi * np.cumsum(freq) / rate_hz
    return np.sin(phase) * np.exp(-t / decay_s) * envelope(n, rate_hz, 0.002, 0.02)


def noise_hit(rng: np.random.Generator, rate_hz: int = RATE_HZ, decay_s: float = 0.1,
              length_s: float = 0.3, tone_hz: float | None = 190.0, bright: bool = False) -> np.ndarray:
    """A noise burst (snare-like, or hat-like when ``bright``: first difference of the noise)."""
    n = int(length_s * rate_hz)
    t = np.arange(n) / rate_hz
    noise = rng.standard_normal(n + 1)
    noise = np.diff(noise) * 0.5 if bright else noise[:n]
    hit = 0.25 * noise * np.exp(-t / decay_s)  # peaks of the noise stay near 1
    if tone_hz:
        hit = hit + 0.6 * np.sin(2 * np.pi * tone_hz * t) * np.exp(-t / (0.6 * decay_s))
    return hit * envelope(n, rate_hz, 0.001, 0.01)


def place(track: np.ndarray, sound: np.ndarray, start_s: float, gain: float, rate_hz: int = RATE_HZ) -> None:
    """Add ``gain * sound`` into ``track`` from ``start_s`` (clipped at the end)."""
    i = int(round(start_s * rate_hz))
    if i >= track.size:
        return
    m = min(sound.size, track.size - i)
    track[i:i + m] += gain * sound[:m]


def notes_track(notes, duration_s: float, rate_hz: int = RATE_HZ, **tone_args) -> np.ndarray:
    """Held additive notes ``(start_s, length_s, freq_hz, gain)`` on a silent track."""
    track = np.zeros(int(round(duration_s * rate_hz)))
    for k, (start, length, freq, gain) in enumerate(notes):
        place(track, additive_tone(freq, length, rate_hz, phase=0.7 * k, **tone_args), start, gain, rate_hz)
    return track


def drum_pattern(duration_s: float, beat_s: float = 0.5, seed: int = 7,
                 rate_hz: int = RATE_HZ) -> np.ndarray:
    """Kick on beats 1 and 3, snare-like bursts on 2 and 4, hat-like ticks on the off-beats."""
    rng = np.random.default_rng(seed)
    track = np.zeros(int(round(duration_s * rate_hz)))
    beats = int(duration_s / beat_s)
    for b in range(beats):
        t = b * beat_s
        if b % 2 == 0:
            place(track, kick(rate_hz), t, 0.8, rate_hz)
        else:
            place(track, noise_hit(rng, rate_hz), t, 0.35, rate_hz)
        place(track, noise_hit(rng, rate_hz, decay_s=0.03, length_s=0.08, tone_hz=None, bright=True),
              t + beat_s / 2, 0.25, rate_hz)
    return track


def between(n_lo: int, n_hi: int) -> float:
    """The geometric middle of two demo modes, Hz: as far from both as possible."""
    return float(np.sqrt(DEMO_MODE_HZ[n_lo] * DEMO_MODE_HZ[n_hi]))


# --- the pieces --------------------------------------------------------------

EMBER_MODES = (2, 3, 4, 5, 6, 4, 3, 5, 7, 2)
DRIFT_MODES = (2, 3, 4, 5, 6, 4, 2, 5, 3, 6)
DRIFT_OFFSET_SEMITONES = 2.0


def render_ember_steps() -> np.ndarray:
    """Held tones, 2.8 s each, on readable modes 2-7 of the demo rig."""
    notes = [(0.2 + 2.8 * k, 2.7, DEMO_MODE_HZ[n], 0.45) for k, n in enumerate(EMBER_MODES)]
    return notes_track(notes, 28.5)


def render_lantern_drift() -> np.ndarray:
    """The same kind of held tones, each two semitones above a mode: they fall between modes."""
    shift = 2.0 ** (DRIFT_OFFSET_SEMITONES / 12.0)
    notes = [(0.2 + 2.6 * k, 2.5, DEMO_MODE_HZ[n] * shift, 0.45) for k, n in enumerate(DRIFT_MODES)]
    return notes_track(notes, 26.5)


def render_kettle_parade() -> np.ndarray:
    """Twenty seconds of hits at 120 beats per minute."""
    return drum_pattern(20.0, seed=7)


def render_three_rooms() -> np.ndarray:
    """Pad on modes (0-12 s), hits (12-24 s), a quick melody between the modes (24-36 s)."""
    duration = 36.0
    track = np.zeros(int(duration * RATE_HZ))
    for k, (lo, hi) in enumerate(((3, 5), (2, 4), (4, 6))):
        for n in (lo, hi):
            place(track, additive_tone(DEMO_MODE_HZ[n], 4.0, attack_s=0.3, release_s=0.4), 4.0 * k, 0.3)
    drums = drum_pattern(12.0, seed=11)
    place(track, drums, 12.0, 1.0)
    tune = [between(3, 4), between(4, 5), between(5, 6), between(6, 7), between(5, 6),
            between(4, 5), between(7, 8), between(6, 7)]
    step = 0.375
    for k in range(int(12.0 / step)):
        place(track, fm_tone(tune[k % len(tune)], 0.34), 24.0 + k * step, 0.4)
    return track


PIECES: dict[str, Piece] = {p.name: p for p in (
    Piece("ember_steps", "Ember Steps", "on-modes", 28.5, render_ember_steps,
          modes=tuple(sorted(set(EMBER_MODES)))),
    Piece("lantern_drift", "Lantern Drift", "between-modes", 26.5, render_lantern_drift,
          offset_semitones=DRIFT_OFFSET_SEMITONES, modes=tuple(sorted(set(DRIFT_MODES)))),
    Piece("kettle_parade", "Kettle Parade", "percussive", 20.0, render_kettle_parade),
    Piece("three_rooms", "Three Rooms", "sections", 36.0, render_three_rooms,
          sections_s=(12.0, 24.0), modes=(2, 3, 4, 5, 6)),
)}

#: The order the scan should rank them in: held on-mode tones first, the piece
#: with one on-mode section of three next; the between-mode and the percussive
#: pieces last (both far below, in either order).
EXPECTED_ORDER = ("ember_steps", "three_rooms", ("lantern_drift", "kettle_parade"))


def write_piece(piece: Piece, folder: Path) -> Path:
    """Render one piece and write it as 16-bit FLAC in ``folder``; returns the path."""
    from showkit.safesave import write_audio

    folder.mkdir(parents=True, exist_ok=True)
    samples = np.clip(piece.render(), -1.0, 1.0)
    return write_audio(folder / piece.filename, samples, RATE_HZ, "PCM_16", what="demo track",
                       file_format="FLAC")


def write_demo_audio(folder: str | Path = "demo_audio") -> list[Path]:
    """Render every demo piece into ``folder`` (made if missing); returns the paths."""
    return [write_piece(p, Path(folder)) for p in PIECES.values()]


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    folder = Path(argv[0]) if argv else Path("demo_audio")
    for path in write_demo_audio(folder):
        print(path)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
