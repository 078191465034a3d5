"""The 0-100 readability score of a passage and of a track.

What a presenter sees is a standing pattern in the flames, so the score
multiplies, frame by frame (30 per second), three things and averages them
over the passage:

- **on-mode share** ``a(t)``: the part of the frame's energy in the tube's
  band that is a sustained spectral peak on a mode whose pattern the holes
  resolve, each peak weighted by how close it lies to the mode
  (:func:`showkit.analysis.pitches.map_to_modes`).  Energy between modes, on
  the breathing or unresolved modes, percussive energy and noise all count
  against it; a silent frame has ``a = 0``.
- **held** ``b(t)``: 1 once the same mode has been hit for long enough for the
  pattern to form -- two ring-up time constants ``2 tau = 2 Q / (pi f_n)`` of
  the resonator and never less than :data:`MIN_HOLD_S` -- else 0.
- **flame contrast at the ceiling** ``c(t)``: the passage is played at its
  ceiling (the safe-level rule of physics.md section 7 over the whole
  passage, from the pressure model's per-frame envelope at every hole, capped
  at digital full scale), and the flame row's contrast in that frame is
  divided by the contrast of a row whose worst hole sits at the safe line
  (capped at 1).  A loud hit in the passage lowers the ceiling and with it
  every other frame's contrast.

``score = 100 * mean_t(a b c)``.  A track's score is the duration-weighted
mean of its best passages, taken best first until they cover half the track.

Approximation (stated wherever the score is shown): the flame height of each
hole and frame is the closed form for a steady sine,
:func:`showkit.physics.flames.sine_flame_height`, with ``r`` = the gain times
the frame's envelope at that hole over the static pressure (physics.md
section 6); the full flame simulation of :mod:`showkit.analysis.pressure` is
used where levels are locked.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from showkit.analysis.features import TrackFeatures
from showkit.analysis.pitches import ModeHits, ModeTable, map_to_modes
from showkit.physics import ceiling as ceil_rule
from showkit.physics.flames import row_contrast, sine_flame_height

#: Shortest hold that counts, s (project's choice: about the eye's grasp of a pattern).
MIN_HOLD_S = 0.3
#: A peak counts as a hit on its mode when its weight is at least this.
HIT_WEIGHT = 0.5
#: ... and it holds at least this share of the frame's energy.
HIT_SHARE = 0.1
#: Modes holding less than this share of a passage's frames are not listed.
MIN_MODE_SHARE = 0.05
#: A track's score covers at least this fraction of its length.
TRACK_COVER = 0.5

APPROXIMATION = ("flame heights in the score use the steady-sine closed form on the "
                 "per-frame pressure envelope")


@dataclass
class FrameScores:
    """Per-frame terms of the score for a whole track (``F`` frames).

    Attributes
    ----------
    on_share : ndarray (F,)
        ``a(t)``, 0 to 1.
    held : ndarray (F,) of bool
        ``b(t)``.
    mode : ndarray (F,) of int
        Index in the :class:`ModeTable` of the mode hit in the frame (-1: none).
    """

    on_share: np.ndarray
    held: np.ndarray
    mode: np.ndarray

    @property
    def term(self) -> np.ndarray:
        return self.on_share * self.held


def hold_frames(table: ModeTable, frame_rate_hz: float) -> np.ndarray:
    """Frames each mode must be held: ``max(MIN_HOLD_S, 2 Q / (pi f_n))`` (per mode)."""
    tau = np.nan_to_num(table.q, nan=0.0) / (np.pi * table.freq_hz)
    return np.ceil(np.maximum(MIN_HOLD_S, 2.0 * tau) * frame_rate_hz).astype(int)


def run_position(labels: np.ndarray) -> np.ndarray:
    """For each frame, how many frames the current label has already lasted (0 at a change)."""
    n = labels.size
    if n == 0:
        return np.zeros(0, dtype=int)
    change = np.ones(n, dtype=bool)
    change[1:] = labels[1:] != labels[:-1]
    starts = np.maximum.accumulate(np.where(change, np.arange(n), 0))
    return np.arange(n) - starts


def frame_scores(features: TrackFeatures, table: ModeTable, shift_cents: float = 0.0,
                 hits: ModeHits | None = None) -> FrameScores:
    """The on-mode share and the held flag of every frame.

    Parameters
    ----------
    features : TrackFeatures
    table : ModeTable
    shift_cents : float
        Transposition applied to the pitches, cents.
    hits : ModeHits, optional
        Precomputed :func:`map_to_modes` of ``features.peak_hz`` at ``shift_cents``.
    """
    hits = hits or map_to_modes(features.peak_hz, table, shift_cents)
    energy = features.energy
    sounding = features.sounding
    part = features.peak_energy * features.peak_harmonic * hits.weight  # (F, K)
    safe = np.where(energy > 0, energy, 1.0)
    on = np.where(sounding, np.minimum(1.0, part.sum(axis=1) / safe), 0.0)
    best = np.argmax(part, axis=1)
    rows = np.arange(part.shape[0])
    strongest = part[rows, best]
    mode = hits.index[rows, best] if part.shape[0] else np.zeros(0, dtype=int)
    is_hit = sounding & (hits.weight[rows, best] >= HIT_WEIGHT) & (strongest >= HIT_SHARE * safe)
    mode = np.where(is_hit, mode, -1)
    need = hold_frames(table, features.frame_rate_hz)
    held = (mode >= 0) & (run_position(mode) >= need[np.maximum(mode, 0)])
    return FrameScores(on_share=on, held=held, mode=mode)


def reference_contrast(reserve: float) -> float:
    """Row contrast when the worst hole swings to the safe line and another stands still."""
    return float(1.0 - sine_flame_height(1.0 - reserve))


@dataclass
class PassageLevel:
    """The passage at its ceiling: gain and flame contrast per frame.

    Attributes
    ----------
    ceiling : Ceiling
    contrast : ndarray (frames,)
        Row contrast per frame at the ceiling (0 to 1).
    factor : ndarray (frames,)
        ``c(t)``: contrast over :func:`reference_contrast`, capped at 1.
    """

    ceiling: ceil_rule.Ceiling
    contrast: np.ndarray
    factor: np.ndarray

    @property
    def median_contrast(self) -> float:
        return float(np.median(self.contrast)) if self.contrast.size else 0.0


def passage_level(envelope_pa: np.ndarray, peak: float, static_pa: float, reserve: float) -> PassageLevel:
    """Ceiling and flame contrast of a passage from its per-frame pressure envelope.

    Parameters
    ----------
    envelope_pa : ndarray, shape (frames, holes)
        Largest analytic-envelope pressure per frame and hole at unit gain, Pa.
    peak : float
        Digital peak of the passage as recorded (1.0 = full scale).
    static_pa : float
        Static overpressure, Pa.
    reserve : float
        Reserve fraction (0 to 0.9).
    """
    env = np.asarray(envelope_pa, dtype=float)
    swing = float(env.max()) if env.size else 0.0
    result = ceil_rule.combine(ceil_rule.pressure_ceiling_db(swing, static_pa, reserve),
                               ceil_rule.full_scale_db(peak))
    gain = 10.0 ** (result.ceiling_db / 20.0)
    if env.size == 0:
        return PassageLevel(result, np.zeros(0), np.zeros(0))
    # the closed form falls monotonically with r, so the row's tallest flame is at the
    # smallest r and its shortest at the largest: two evaluations per frame suffice
    ratio = np.clip(gain * np.stack([env.min(axis=1), env.max(axis=1)], axis=1) / static_pa, 0.0, 1.0)
    contrast = row_contrast(sine_flame_height(ratio))
    ref = reference_contrast(reserve)
    factor = np.minimum(1.0, contrast / ref) if ref > 0 else np.zeros_like(contrast)
    return PassageLevel(result, contrast, factor)


def passage_score(scores: FrameScores, factor: np.ndarray, first: int, last: int) -> float:
    """``100 * mean(a b c)`` over frames ``first`` to ``last - 1`` (0 for an empty passage)."""
    if last <= first:
        return 0.0
    term = scores.term[first:last]
    c = factor[:term.size]
    if c.size < term.size:
        c = np.concatenate([c, np.zeros(term.size - c.size)])
    return float(100.0 * np.mean(term * c))


def mode_shares(scores: FrameScores, table: ModeTable, first: int, last: int) -> list[tuple[int, float]]:
    """Modes hit in frames ``first`` to ``last - 1``: ``[(n, time share), ...]``, most time first."""
    m = scores.mode[first:last]
    m = m[m >= 0]
    if last <= first or m.size == 0:
        return []
    idx, counts = np.unique(m, return_counts=True)
    share = counts / float(last - first)
    order = np.argsort(-counts, kind="stable")
    return [(int(table.n[idx[k]]), float(share[k])) for k in order if share[k] >= MIN_MODE_SHARE]


def track_score(passage_scores: list[float], lengths_s: list[float]) -> float:
    """Duration-weighted mean of the best passages covering :data:`TRACK_COVER` of the track."""
    total = float(sum(lengths_s))
    if total <= 0 or not passage_scores:
        return 0.0
    need = TRACK_COVER * total
    got = 0.0
    acc = 0.0
    for k in np.argsort(-np.asarray(passage_scores), kind="stable"):
        take = min(lengths_s[k], need - got)
        acc += take * passage_scores[k]
        got += take
        if got >= need - 1e-9:
            break
    return float(acc / got) if got > 0 else 0.0
