"""Which transposition would lay a track's notes better on the tube's modes.

The search runs on the detected notes, with cents resolution, without
re-synthesising anything:

1. for every shift from -350 to +350 cents (1-cent steps; a move of 300
   cents must be found from inside the range, not at its edge), each
   sounding frame counts by its most prominent note (weight: the squared
   share of the band it carries) that the shift lays within a readable
   mode's tolerance window (:func:`showkit.analysis.score.tolerance_cents`),
   which says how much note-time each shift would put on modes;
2. the best few shifts of that curve (at least :data:`SEPARATION_CENTS` apart)
   are verified, best first, by the full score -- map, hits, holds, passages,
   track score, exactly as the scan scores the track as it is -- and the first
   that beats the track as it is by :data:`MIN_GAIN` points is suggested.

The score a shift promises is not the score at that one shift but the least
of the scores at the shift and :data:`PROMISE_SPREAD_CENTS` either side
(:func:`promise_offsets`): the search picks the shift that lays the notes
found best, and at its peak a note often sits at the very edge of a mode's
tolerance window, where a real shift drops it (the notes of shifted audio
land a few cents from the notes found moved: a pitch shifter's or a
synthesizer's error, the pitch estimate's).  Measured on the pieces of
tests/benchmarks/eval_scan_unseen.py that get a suggestion, each really
shifted two ways (the same MIDI performance re-rendered with a pitch bend of
the whole shift, which keeps the samples and the tempo; and the recording
through :func:`render_preview`): the score at the one shift promised a fast
jig 56 where the shifted copies scored 26 (bend) and 41 (pitch shifter) --
its curve falls from 56 to 29 within 4 cents of the peak -- and overshot
by 6.2 (bend) and 5.7 (shifter) points on average, 30 and 15 at worst; the
least over +-5 cents promises the jig 34 and errs by 4.5 and 4.0 on average,
8.5 and 7.5 at worst (the mean over the three erred by 5.0 and 3.7, but
still promised the jig 45).

A preview of the shifted best passage is rendered with librosa's pitch
shifter (phase-vocoder time stretch and resampling, ``librosa.effects.pitch_shift``;
Laroche & Dolson, IEEE Trans. Speech Audio Proc. 7(3), 1999).
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import numpy as np

from showkit.analysis.features import TrackFeatures
from showkit.analysis.pitches import ModeTable
from showkit.limits import TRANSPOSE_RANGE_CENTS

#: Frames of the curve computed at once (memory: frames x notes x shifts).
CURVE_BLOCK_FRAMES = 512
#: Shifts scored in full.
CANDIDATES = 5
#: Candidates at least this far apart, cents.
SEPARATION_CENTS = 30
#: Points a shift must gain over the track as it is to be suggested.
MIN_GAIN = 2.0
#: The least score a suggested shift must reach: a shift that leaves the track unreadable
#: (a drum kit whose pitched ringing lands on a mode now and then) is no suggestion.
MIN_SHIFTED_SCORE = 10.0
#: A shift's promised score is the least of the scores at the shift and this far either side, cents:
#: about the error of a held note's pitch found in real music (median 3.6 c, 90th percentile 15 c,
#: tests/benchmarks/eval_scan_unseen.py) and of a real shift (a pitch bend of 305 c measured 302 c), so
#: that a shift whose notes sit at the very edge of the modes' tolerance windows promises what a real
#: shift keeps of them.
PROMISE_SPREAD_CENTS = 5.0


def promise_offsets() -> tuple[float, float, float]:
    """The offsets (cents) around a shift whose scores' least is the shift's promised score."""
    return (-PROMISE_SPREAD_CENTS, 0.0, PROMISE_SPREAD_CENTS)


def shift_curve(features: TrackFeatures, table: ModeTable, gate: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``(shifts_cents, note_time_on_modes)`` for every whole-cent shift within +-TRANSPOSE_RANGE_CENTS.

    ``value(s) = sum_t gate_t max_k w_tk [note k of frame t, moved by s, lies on a readable mode]``
    with ``w = share^2``, the squared share of the band the note carries: each frame counts once
    (the ground truth's "time at which a note is held on a mode") and by its most prominent note
    on a mode, so that the faint notes of a dense texture (upper partials taken as notes) weigh
    little.  Measured on the rendered scores of tests/realmusic.py: the curve's peak is the shift
    that undoes a known move (+-25 cents) in 4 of 5 off-mode copies, against 2 of 5 for the
    energy-weighted histogram of every note (the weight share/0.7 to the 4th also gave 4 of 5;
    share/0.5 and share/0.7 squared gave 3 of 5).
    """
    from showkit.analysis import score as sc

    shifts = np.arange(-TRANSPOSE_RANGE_CENTS, TRANSPOSE_RANGE_CENTS + 1)
    readable = np.asarray(table.readable, bool)
    if not readable.any() or features.frames == 0:
        return shifts, np.zeros(shifts.size)
    f = features.notes_hz.astype(float)
    safe = np.where(features.energy > 0, features.energy, 1.0)
    share = features.notes_energy * features.notes_tonal / safe[:, None]
    ok = (np.isfinite(f) & (features.notes_tonal >= sc.MIN_TONAL) & (share >= sc.HIT_ON)
          & (gate[:, None] > 0))
    rows = np.nonzero(ok.any(axis=1))[0]
    if rows.size == 0:
        return shifts, np.zeros(shifts.size)
    base = 1200.0 * np.log2(np.min(table.freq_hz)) - 2 * TRANSPOSE_RANGE_CENTS - 100
    size = int(np.ceil(1200.0 * np.log2(np.max(table.freq_hz)) - base)) + 2 * TRANSPOSE_RANGE_CENTS + 200
    comb = np.zeros(size, dtype=bool)
    tol = sc.tolerance_cents(table)
    for fm, t in zip(table.freq_hz[readable], tol[readable]):
        c = 1200.0 * np.log2(fm) - base
        comb[int(np.ceil(c - t)):int(np.floor(c + t)) + 1] = True
    pos = np.rint(1200.0 * np.log2(np.where(ok, f, np.min(table.freq_hz))) - base).astype(int)
    weight = np.where(ok, np.minimum(1.0, share) ** 2, 0.0).astype(np.float32)
    # comb[clip(pos + s, 0, size - 1)] for every shift s is one row of a sliding window over the comb
    # padded with its edge values (pos held within TRANSPOSE_RANGE_CENTS of the comb reads the same entries)
    pos = np.clip(pos, -TRANSPOSE_RANGE_CENTS, size - 1 + TRANSPOSE_RANGE_CENTS) + TRANSPOSE_RANGE_CENTS
    windows = np.lib.stride_tricks.sliding_window_view(np.pad(comb, 2 * TRANSPOSE_RANGE_CENTS, mode="edge"), shifts.size)
    value = np.zeros(shifts.size)
    for a in range(0, rows.size, CURVE_BLOCK_FRAMES):  # bounded memory on long tracks
        r = rows[a:a + CURVE_BLOCK_FRAMES]
        on = np.zeros((r.size, shifts.size), dtype=np.float32)
        for k in range(pos.shape[1]):
            np.maximum(on, windows[pos[r, k]] * weight[r, k, None], out=on)
        value += gate[r].astype(np.float32) @ on
    return shifts, value


def candidates(shifts: np.ndarray, value: np.ndarray, count: int = CANDIDATES) -> list[float]:
    """The best shifts of the curve, at least :data:`SEPARATION_CENTS` apart (smaller shift on ties)."""
    order = np.lexsort((np.abs(shifts), -value))
    out: list[float] = []
    for k in order:
        if value[k] <= 0 or len(out) >= count:
            break
        if all(abs(shifts[k] - s) >= SEPARATION_CENTS for s in out):
            # the middle of the plateau around the peak: every shift there lays the notes as well
            top = value >= value[k] * (1.0 - 1e-6)
            lo = k
            while lo > 0 and top[lo - 1]:
                lo -= 1
            hi = k
            while hi < value.size - 1 and top[hi + 1]:
                hi += 1
            out.append(float(shifts[(lo + hi) // 2]))
    return out


def search(features: TrackFeatures, table: ModeTable, gate: np.ndarray,
           score_at: Callable[[float], float]) -> tuple[float, float, dict]:
    """``(shift_cents, score, scored)``: the suggestion (0 unless it gains :data:`MIN_GAIN` and
    reaches :data:`MIN_SHIFTED_SCORE`).

    The curve's best shifts are verified in the curve's order by the full
    score: the first that beats the track as it is by :data:`MIN_GAIN`
    points is suggested; none is when a shift within
    :data:`SEPARATION_CENTS` of 0 comes first (the track as it is lays its
    notes as well as any other).  The curve, not the score, ranks the
    candidates: on the rendered scores the full score of a wrong shift that
    lays a few loud notes on modes could beat the right one (a rag moved
    -300 cents: +196 scored 43.6, +300 about 33), while the curve's peak was
    the right shift in 4 of 5 copies.  ``score_at(shift_cents)`` is the track
    score a shift by ``shift_cents`` promises (the scan's: the least over
    :func:`promise_offsets` of the scores with every note moved); ``scored``
    maps every shift scored to its score.
    """
    shifts, value = shift_curve(features, table, gate)
    base = float(score_at(0.0))
    scored = {0.0: base}
    for s in candidates(shifts, value):
        if abs(s) < SEPARATION_CENTS:
            break
        scored[s] = float(score_at(s))
        if scored[s] >= max(base + MIN_GAIN, MIN_SHIFTED_SCORE):
            return s, scored[s], scored
    return 0.0, base, scored


def best_shift(scores_by_shift: dict[float, float]) -> tuple[float, float]:
    """``(shift_cents, score)`` of the suggestion: 0 unless a shift gains :data:`MIN_GAIN`."""
    base = scores_by_shift.get(0.0, 0.0)
    shift = max(scores_by_shift, key=lambda s: (scores_by_shift[s], -abs(s)))
    if scores_by_shift[shift] < max(base + MIN_GAIN, MIN_SHIFTED_SCORE):
        return 0.0, base
    return shift, scores_by_shift[shift]


def render_preview(path: str | Path, start_s: float, end_s: float, semitones: float,
                   out_path: str | Path, protect=()) -> Path:
    """Write the passage ``start_s``-``end_s`` of ``path`` shifted by ``semitones`` as a 16-bit WAV.

    Parameters
    ----------
    path : path
        Source track.
    start_s, end_s : float
        Passage, s.
    semitones : float
        Shift, semitones (fractions allowed).
    out_path : path
        WAV file written (replaced if present).
    """
    import librosa

    from showkit.analysis.audio import load_audio

    audio = load_audio(path, None, start_s, end_s)
    shifted = librosa.effects.pitch_shift(audio.samples.astype(np.float32), sr=audio.rate_hz,
                                          n_steps=float(semitones))
    peak = float(np.max(np.abs(shifted))) if shifted.size else 0.0
    if peak > 1.0:
        shifted = shifted / peak
    from showkit.safesave import write_audio

    return write_audio(Path(out_path), shifted, audio.rate_hz, "PCM_16",
                       protect=[(path, "the source track")] + list(protect), what="preview")
