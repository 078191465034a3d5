"""12-TET note names and cents (showkit.physics.pitch) against librosa and ISO 16."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from showkit.physics.pitch import cents, hz_to_midi, midi_to_hz, nearest_note, note_name

librosa = pytest.importorskip("librosa")


def _ascii(name: str) -> str:
    # librosa writes sharps as the unicode sign; showkit writes "#"
    return str(name).replace("\u266f", "#")


def test_a4_is_440_hz():
    # ISO 16:1975: A4 = 440 Hz; MIDI note 69 (MIDI 1.0 specification)
    assert midi_to_hz(69) == 440.0
    assert nearest_note(440.0) == ("A4", 0.0)
    assert note_name(60) == "C4"  # middle C in scientific pitch notation, as librosa names it (common practice, no source)


def test_names_and_midi_against_librosa_on_a_wide_grid():
    # reference: librosa.hz_to_note / hz_to_midi (A4 = 440 Hz, sharps)
    freqs = np.geomspace(16.0, 8000.0, 3001)
    midi_ref = librosa.hz_to_midi(freqs)
    assert np.allclose(hz_to_midi(freqs), midi_ref, rtol=0, atol=1e-9)
    names_ref = [_ascii(n) for n in librosa.hz_to_note(freqs)]
    ours = [nearest_note(float(f)) for f in freqs]
    # stay clear of exact quarter-tones, where rounding may go either way
    clear = np.abs(np.abs(midi_ref - np.round(midi_ref)) - 0.5) > 1e-6
    assert [n for (n, _), ok in zip(ours, clear) if ok] == [n for n, ok in zip(names_ref, clear) if ok]
    offsets = np.array([c for _, c in ours])
    assert np.allclose(offsets[clear], 100.0 * (midi_ref - np.round(midi_ref))[clear], atol=1e-7)


@given(st.floats(10.0, 20000.0))
def test_nearest_note_against_librosa(freq_hz):
    # reference: librosa.hz_to_note with cents=True gives e.g. "A4+5" / "C#3-12"
    name, off = nearest_note(freq_hz)
    midi = librosa.hz_to_midi(freq_hz)
    if abs(abs(midi - round(midi)) - 0.5) < 1e-6:
        return  # quarter-tone: either neighbour is right
    assert name == _ascii(librosa.hz_to_note(freq_hz))
    assert -50.0 <= off <= 50.0
    assert off == pytest.approx(100.0 * (midi - round(midi)), abs=1e-7)
    # the note's own frequency plus the cents gives the frequency back
    assert midi_to_hz(round(midi)) * 2 ** (off / 1200.0) == pytest.approx(freq_hz, rel=1e-12)


@pytest.mark.parametrize("freq_hz, name", [
    # equal-temperament values from f = 440 * 2^((m - 69)/12) (DEVELOPERS.md Methods §8), 2 decimals
    (261.63, "C4"), (27.50, "A0"), (4186.01, "C8"), (466.16, "A#4"), (82.41, "E2"), (110.0, "A2"),
])
def test_known_notes(freq_hz, name):
    assert nearest_note(freq_hz)[0] == name
    assert abs(nearest_note(freq_hz)[1]) < 0.1
    assert _ascii(librosa.hz_to_note(freq_hz)) == name


def test_cents():
    # 1200 log2(f / f_ref) (DEVELOPERS.md Methods §8): an octave is 1200 cents, a semitone 100
    assert cents(880.0, 440.0) == pytest.approx(1200.0)
    assert cents(440.0 * 2 ** (1 / 12), 440.0) == pytest.approx(100.0)
    assert cents(440.0, 880.0) == pytest.approx(-1200.0)
    assert nearest_note(445.0)[1] == pytest.approx(1200 * np.log2(445 / 440))


@given(st.floats(-20.0, 140.0))
def test_midi_round_trip(m):
    assert float(hz_to_midi(midi_to_hz(m))) == pytest.approx(m, abs=1e-9)
