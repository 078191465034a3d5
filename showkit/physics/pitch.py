"""Twelve-tone equal temperament: note names and cents (DEVELOPERS.md Methods §8).

``f = 440 * 2 ** ((m - 69) / 12)`` for MIDI note ``m`` with A4 = 440 Hz
(ISO 16:1975); cents ``1200 log2(f / f_ref)``.
"""

from __future__ import annotations

import numpy as np

A4_HZ = 440.0
A4_MIDI = 69
NOTE_NAMES = ("C", "C#", "D", "D#", "E", "F", "F#", "G", "G#", "A", "A#", "B")


def midi_to_hz(midi) -> np.ndarray:
    """Frequency in Hz of (fractional) MIDI note numbers."""
    return A4_HZ * 2.0 ** ((np.asarray(midi, dtype=float) - A4_MIDI) / 12.0)


def hz_to_midi(freq_hz) -> np.ndarray:
    """Fractional MIDI note number of frequencies in Hz (> 0)."""
    return A4_MIDI + 12.0 * np.log2(np.asarray(freq_hz, dtype=float) / A4_HZ)


def cents(freq_hz, ref_hz) -> np.ndarray:
    """Interval from ``ref_hz`` to ``freq_hz`` in cents."""
    return 1200.0 * np.log2(np.asarray(freq_hz, dtype=float) / np.asarray(ref_hz, dtype=float))


def note_name(midi: int) -> str:
    """``69`` -> ``"A4"``; sharps only, octave numbers as in scientific pitch notation."""
    midi = int(midi)
    return f"{NOTE_NAMES[midi % 12]}{midi // 12 - 1}"


def nearest_note(freq_hz: float) -> tuple[str, float]:
    """The nearest 12-TET note to ``freq_hz`` and the offset from it in cents (-50..+50)."""
    midi = float(hz_to_midi(freq_hz))
    nearest = int(np.round(midi))
    return note_name(nearest), float(100.0 * (midi - nearest))
