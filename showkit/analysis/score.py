"""The time x mode map of a track, holds, and the 0-100 readability score.

**The map.**  For every flame frame (30 per second) and every mode of the
tube, the *strength* (0 to 1) is the share of the music's energy in the
tube's band carried by the notes sitting on that mode: a note is on a mode
when its fundamental lies within the mode's half-power half-width
``f_n / (2 Q)`` widened to :data:`MIN_TOLERANCE_CENTS` (the gas warms during a
show and moves the modes by about 3 cents per kelvin; DEVELOPERS.md Methods §2)
and at most :data:`MAX_TOLERANCE_CENTS`, and only its sustained part counts
(the harmonic/percussive split).  The strength is then gated on an absolute
scale: frames more than :data:`GATE_RANGE_DB` below the track's loud level
(its 95th-percentile band energy), or whose predicted pressure at the holes
is that far below the track's loud pressure, fade to nothing, and so does
anything under :data:`features.SILENCE_DB`.  Everything is a ratio, so the
same music at another level draws the same map; silence, drums and noise
(no sustained note) draw nothing.

**Hits and holds.**  A mode is *hit* in a frame when its strength reaches
:data:`HIT_ON` and stays hit while it stays above :data:`HIT_OFF`
(hysteresis); a gap of one frame, or of up to :data:`VIBRATO_GAP_FRAMES`
frames while a note stays within :data:`VIBRATO_CENTS` of the mode (vibrato
swinging out of the band), does not end the hit.  A note played again on
the same mode (its energy rising by :data:`ONSET_DB` within two frames)
starts a new hit.  A hit is *held*, all along, when it spends the ring-up
time inside the band: two time constants ``2 tau = 2 Q / (pi f_n)`` of the
resonator and never less than :data:`MIN_HOLD_S`.

**The score.**  ``score = 100 * mean_t(h(t))`` over a passage's frames, with
``h(t)`` the largest, over the modes whose pattern the holes resolve, of
``held * min(1, strength / FULL_STRENGTH)``: in plain words, *the share of
the passage's time during which a note is held on a readable mode*, a note
counting fully once it carries a quarter of the sound in the band
(one voice of four).  A track's score is the duration-weighted mean of its
best passages, taken best first until they cover half the track.  The flame
contrast at the passage's ceiling is reported beside the score
(:func:`passage_level`), not multiplied into it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from showkit.analysis.features import TrackFeatures
from showkit.analysis.pitches import ModeTable
from showkit.physics import ceiling as ceil_rule
from showkit.physics.flames import row_contrast, sine_flame_height

#: Shortest hold that counts, s (project's choice: about the eye's grasp of a pattern).
MIN_HOLD_S = 0.2
#: Narrowest and widest tolerance of a note on a mode, cents: 10 and 15 cents (project's choice: the gas
#: warms by a few kelvin during a show, about 3 cents per kelvin) plus 1 cent for the error of the
#: pitch estimate.  Measured on the rendered scores of tests/realmusic.py (frame-level mode-hit F1
#: against the MIDI notes, pooled): +0 cents 0.677, +1 0.678, +2 0.668, +3 0.659, +4 0.652 -- a wider
#: margin lets notes just off the mode in (precision 0.68 at +1, 0.64 at +3; recall 0.68 at both).
MIN_TOLERANCE_CENTS = 11.0
MAX_TOLERANCE_CENTS = 16.0
#: A note whose fundamental is less sustained than this (harmonic mask) is not drawn.
MIN_TONAL = 0.5
#: Strength at which a hit starts, and below which it ends.
HIT_ON = 0.02
HIT_OFF = 0.01
#: Strength at which a held note counts fully in the score (a quarter of the band: one voice of four).
FULL_STRENGTH = 0.25
#: Frames fade out between the track's loud level minus GATE_RANGE_DB and GATE_FADE_DB above that, dB.
GATE_RANGE_DB = 45.0
GATE_FADE_DB = 10.0
#: Gaps bridged while a note stays near the mode (vibrato), frames; and how near, cents.
VIBRATO_GAP_FRAMES = 3
VIBRATO_CENTS = 60.0
#: Shortest hit drawn, frames.
MIN_HIT_FRAMES = 6
#: Frames over which a note's offset from a mode is averaged (about one vibrato cycle).
VIBRATO_FRAMES = 7
#: A re-played note: its energy on the mode rises by this within two frames, dB.
ONSET_DB = 6.0
#: Fastest fall of a held note's level on its mode, dB per second (least-squares slope over the
#: hold's frames): over the shortest hold (MIN_HOLD_S) the drive then loses at most 12 dB, a
#: quarter of its pressure; a note fading faster (a kick drum's pitched tail, a plucked string's
#: end) leaves no pattern to read.  Project's choice, measured on the rendered scores of
#: tests/realmusic.py: held segments of the organ chorale fall at most 31 dB/s, 99 % of the
#: strings', flute's and violin's at most 68, 49 and 61; a synthesized kick's 50-Hz tail 63 dB/s
#: (median) and scored 8 on a mode without this limit, 0 with it; the set's scores move by
#: at most 3 points (the reel 58.2 -> 55.3, the sonata 66.9 -> 66.1).
MAX_HOLD_DECAY_DB_PER_S = 60.0
#: Modes processed at once by :func:`mode_frames` (bounds its memory).
MODE_GROUP = 6
#: Modes holding less than this share of a passage's frames are not listed.
MIN_MODE_SHARE = 0.05
#: A track's score covers at least this fraction of its length.
TRACK_COVER = 0.5

APPROXIMATION = ("the score is the share of time a note is held on a readable mode; "
                 "flame contrast at the ceiling (steady-sine flame heights on the per-frame "
                 "pressure envelope) is reported beside it")


def tolerance_cents(table: ModeTable) -> np.ndarray:
    """Per mode: how far a note may lie from it and count as on it, cents."""
    return np.clip(np.asarray(table.half_width_cents, float), MIN_TOLERANCE_CENTS, MAX_TOLERANCE_CENTS)


def loudness_gate(level_db: np.ndarray, sounding: np.ndarray | None = None) -> np.ndarray:
    """0 to 1 per frame: the frame against the track's loud level (95th percentile of ``level_db``)."""
    lv = np.asarray(level_db, dtype=float)
    use = lv if sounding is None else lv[np.asarray(sounding, bool)]
    if use.size == 0:
        return np.zeros(lv.shape)
    ref = float(np.percentile(use, 95))
    return np.clip((lv - (ref - GATE_RANGE_DB)) / GATE_FADE_DB, 0.0, 1.0)


def frame_gate(features: TrackFeatures, pressure_pa: np.ndarray | None = None) -> np.ndarray:
    """The absolute-scale gate of every frame (0 to 1): band loudness and predicted hole pressure."""
    sounding = features.sounding
    gate = np.where(sounding, loudness_gate(features.level_db, sounding), 0.0)
    if pressure_pa is not None and np.size(pressure_pa):
        p = np.asarray(pressure_pa, dtype=float)
        p = np.pad(p, (0, max(0, gate.size - p.size)))[:gate.size]
        with np.errstate(divide="ignore"):
            p_db = 20.0 * np.log10(np.maximum(p, 1e-12))
        gate = gate * loudness_gate(p_db, sounding & (p > 0))
    return gate


def nearest_modes(freq_hz: np.ndarray, table: ModeTable, shift_cents: float = 0.0):
    """Index of the nearest mode (-1 for none) and the offset from it in cents, after a shift."""
    f = np.asarray(freq_hz, dtype=float)
    ok = np.isfinite(f) & (f > 0)
    if table.freq_hz.size == 0:
        return np.full(f.shape, -1), np.full(f.shape, np.nan)
    logf = np.where(ok, np.log2(np.where(ok, f, 1.0)) + shift_cents / 1200.0, 0.0)
    logm = np.log2(table.freq_hz)
    if logm.size == 1:
        j = np.zeros(f.shape, dtype=int)
    else:
        j = np.clip(np.searchsorted(logm, logf), 1, logm.size - 1)
        j = np.where(np.abs(logf - logm[j - 1]) < np.abs(logf - logm[j]), j - 1, j)
    cents = 1200.0 * (logf - logm[j])
    return np.where(ok, j, -1), np.where(ok, cents, np.nan)


@dataclass
class ModeFrames:
    """The time x mode map of a track at one transposition (``M`` modes, ``F`` frames).

    Attributes
    ----------
    strength : ndarray (M, F), float32
        Share of the band's sustained energy on each mode, gated (0 to 1).
    hit : ndarray (M, F) of bool
    held : ndarray (M, F) of bool
    """

    strength: np.ndarray
    hit: np.ndarray
    held: np.ndarray

    def term(self, table: ModeTable) -> np.ndarray:
        """``h(t)`` of the score, per frame (0 to 1)."""
        if self.strength.shape[0] == 0:
            return np.zeros(self.strength.shape[1])
        w = np.where(self.held & np.asarray(table.readable)[:, None],
                     np.minimum(1.0, self.strength / FULL_STRENGTH), 0.0)
        return w.max(axis=0)


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


def _runs(on: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Per row of a boolean (M, F) array: run id (0 outside runs) and the start frame of each frame's run."""
    m, f = on.shape
    start = on & ~np.concatenate([np.zeros((m, 1), bool), on[:, :-1]], axis=1)
    rid = np.cumsum(start.ravel()).reshape(m, f) * on
    idx = np.where(start, np.arange(f)[None, :], 0)
    first = np.maximum.accumulate(idx, axis=1)
    return rid, first


def _fill_gaps(on: np.ndarray, allowed: np.ndarray, longest: int) -> np.ndarray:
    """Fill gaps of up to ``longest`` frames between two on-frames where ``allowed`` holds all along."""
    out = on.copy()
    f = on.shape[1]
    if f < 3:
        return out
    # distance to the previous and next on-frame
    idx = np.arange(f)[None, :]
    last_on = np.maximum.accumulate(np.where(on, idx, -10 ** 9), axis=1)
    next_on = np.flip(np.minimum.accumulate(np.flip(np.where(on, idx, 10 ** 9), axis=1), axis=1), axis=1)
    gap = next_on - last_on - 1
    inside = ~on & (last_on >= 0) & (next_on < f)
    ok_gap = inside & (gap <= longest)
    # the whole gap must be allowed: count not-allowed frames per gap via cumulative sums
    bad = np.cumsum(~allowed, axis=1)
    lo = np.clip(last_on, 0, f - 1)
    hi = np.clip(next_on - 1, 0, f - 1)
    bad_in = np.take_along_axis(bad, hi, axis=1) - np.take_along_axis(bad, lo, axis=1)
    return out | (ok_gap & ((gap <= 1) | (bad_in == 0)))


def mode_frames(features: TrackFeatures, table: ModeTable, gate: np.ndarray,
                shift_cents: float = 0.0) -> ModeFrames:
    """The map, hits and holds of every mode and frame, with every note moved by ``shift_cents``.

    Parameters
    ----------
    features : TrackFeatures
    table : ModeTable
    gate : ndarray (F,)
        :func:`frame_gate`.
    shift_cents : float
        Transposition applied to the notes, cents.
    """
    frames = features.frames
    modes = table.freq_hz.size
    if modes == 0 or frames == 0:
        z = np.zeros((modes, frames))
        return ModeFrames(z.astype(np.float32), z.astype(bool), z.astype(bool))
    j, cents = nearest_modes(features.notes_hz, table, shift_cents)
    tol = tolerance_cents(table)
    jj = np.maximum(j, 0)
    sustained = (features.notes_tonal >= MIN_TONAL) & (features.notes_energy > 0)
    absc = np.abs(np.nan_to_num(cents, nan=1e9))
    near = (j >= 0) & sustained & (absc <= VIBRATO_CENTS)
    safe = np.where(features.energy > 0, features.energy, 1.0)
    share = np.where(near, features.notes_energy * features.notes_tonal / safe[:, None], 0.0)
    rows = np.broadcast_to(np.arange(frames)[:, None], j.shape)
    need_all = hold_frames(table, features.frame_rate_hz)
    out_strength = np.zeros((modes, frames), dtype=np.float32)
    out_hit = np.zeros((modes, frames), dtype=bool)
    out_held = np.zeros((modes, frames), dtype=bool)
    # the modes are independent rows: a few at a time keeps memory bounded for long tracks
    for g0 in range(0, modes, MODE_GROUP):
        g1 = min(modes, g0 + MODE_GROUP)
        sel = near & (jj >= g0) & (jj < g1)
        if not sel.any():
            continue
        st, ht, hd = _mode_rows(jj[sel] - g0, rows[sel], cents[sel], absc[sel], share[sel], g1 - g0,
                                frames, tol[g0:g1], need_all[g0:g1], safe, gate, features.frame_rate_hz)
        out_strength[g0:g1], out_hit[g0:g1], out_held[g0:g1] = st, ht, hd
    return ModeFrames(out_strength, out_hit, out_held)


def _segment_slopes(seg: np.ndarray, on: np.ndarray, level: np.ndarray) -> np.ndarray:
    """Least-squares slope (level units per frame) of ``level`` over each segment's ``on`` frames,
    indexed by segment id (NaN where a segment has fewer than two such frames)."""
    if seg.size == 0:
        return np.full(1, np.nan)
    n_seg = int(seg.max()) + 1
    ids = seg.ravel()
    w = (on & (seg > 0)).ravel().astype(np.float64)
    t = np.broadcast_to(np.arange(seg.shape[1], dtype=np.float64), seg.shape).ravel()
    y = level.ravel().astype(np.float64)
    n, st, sy = (np.bincount(ids, weights=w * v, minlength=n_seg) for v in (1.0, t, y))
    stt = np.bincount(ids, weights=w * t * t, minlength=n_seg)
    sty = np.bincount(ids, weights=w * t * y, minlength=n_seg)
    den = n * stt - st * st
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where((n >= 2) & (den > 0), (n * sty - st * sy) / den, np.nan)


def _mode_rows(jn, fn, cents, absc, share, modes, frames, tol, need, safe, gate, frame_rate_hz):
    """Strength, hit and held of ``modes`` rows from the notes near them (``jn`` row, ``fn`` frame)."""
    raw = np.zeros((modes, frames))
    np.add.at(raw, (jn, fn), share)
    # the pitch of the note near each mode, averaged over a vibrato cycle (time inside the band)
    offset = np.full((modes, frames), np.inf, dtype=np.float32)
    np.minimum.at(offset, (jn, fn), absc)
    signed = np.zeros((modes, frames), dtype=np.float32)
    signed[jn, fn] = cents
    close = np.isfinite(offset)
    from scipy.ndimage import uniform_filter1d

    num = uniform_filter1d(signed, VIBRATO_FRAMES, axis=1, mode="constant")
    den = uniform_filter1d(close.astype(np.float32), VIBRATO_FRAMES, axis=1, mode="constant")
    mean_offset = np.abs(num / np.maximum(den, 1e-9))
    del num, den, signed
    inside = close & ((offset <= tol[:, None]) | (mean_offset <= tol[:, None]))
    del offset, mean_offset
    strength = np.where(inside, np.minimum(1.0, raw), 0.0) * gate[None, :]
    # hysteresis: start at HIT_ON, go on while above HIT_OFF
    above_on = strength >= HIT_ON
    above_off = strength >= HIT_OFF
    rid, _ = _runs(above_off)
    has_on = np.zeros(rid.max() + 1, dtype=bool)
    has_on[rid[above_on]] = True
    has_on[0] = False
    hit = has_on[rid]
    bridged = _fill_gaps(hit, close, VIBRATO_GAP_FRAMES)
    # runs shorter than MIN_HIT_FRAMES are not drawn (a note is steady; noise is not)
    rid, _ = _runs(bridged)
    length = np.bincount(rid.ravel(), minlength=int(rid.max()) + 1)
    bridged &= length[rid] >= MIN_HIT_FRAMES
    hit &= bridged
    # a re-played note starts a new hit: its energy on the mode jumps within two frames
    with np.errstate(divide="ignore"):
        level = 10.0 * np.log10(np.maximum(raw * safe[None, :], 1e-12))
    before = np.minimum(np.concatenate([np.full((modes, 1), -120.0), level[:, :-1]], axis=1),
                        np.concatenate([np.full((modes, 2), -120.0), level[:, :-2]], axis=1))
    onset = (level - before >= ONSET_DB) & hit
    onset[:, 1:] &= ~onset[:, :-1]  # one onset per rise
    # run position counted in hit frames since the run's start or the last onset inside it
    _, first = _runs(bridged)
    mark = bridged & (onset | (np.arange(frames)[None, :] == first))
    seg = np.cumsum(mark.ravel()).reshape(modes, frames) * bridged
    # a segment is held, from its start, once its frames inside the band reach the ring-up time
    inband = np.bincount(seg.ravel(), weights=hit.ravel(), minlength=int(seg.max()) + 1)
    # ... and its level on the mode does not fall faster than MAX_HOLD_DECAY_DB_PER_S (no slope, NaN,
    # only for a segment of fewer than two hit frames, which the length test above already refuses;
    # the level is finite: floored at -120 dB)
    fall = -np.nan_to_num(_segment_slopes(seg, hit, level), nan=0.0) * frame_rate_hz
    held = bridged & (seg > 0) & (inband[seg] >= need[:, None]) & (fall[seg] <= MAX_HOLD_DECAY_DB_PER_S)
    return strength.astype(np.float32), bridged, held


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
        Contrast over :func:`reference_contrast`, capped at 1.
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
    envelope_pa : ndarray, shape (frames, k)
        Analytic-envelope pressure per frame at unit gain, Pa: one column per hole, or
        the scan's two columns (least and largest over the holes,
        :func:`showkit.physics.response.envelope_range`); only each frame's least and
        largest value are read, so both give the same result.
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


def passage_score(term: np.ndarray, first: int, last: int) -> float:
    """``100 * mean(h)`` over frames ``first`` to ``last - 1`` (0 for an empty passage)."""
    if last <= first:
        return 0.0
    return float(100.0 * np.mean(term[first:last]))


def mode_shares(mf: ModeFrames, table: ModeTable, first: int, last: int) -> list[tuple[int, float]]:
    """Readable modes held in frames ``first`` to ``last - 1``: ``[(n, time share), ...]``, most first.

    Every mode held in any frame is listed (the modes that earned the
    passage's score; several modes may be held in the same frame).  The scan's
    table lists those held at least :data:`MIN_MODE_SHARE` of the time
    (:func:`listed_shares`); the JSON and CSV give them all.
    """
    if last <= first or mf.held.shape[0] == 0:
        return []
    held = mf.held[:, first:last] & np.asarray(table.readable)[:, None]
    share = held.mean(axis=1)
    order = np.argsort(-share, kind="stable")
    return [(int(table.n[k]), float(share[k])) for k in order if share[k] > 0]


def listed_shares(shares: list) -> list:
    """The entries of a passage's ``mode_shares`` (dicts with ``share``) the table lists:
    held at least :data:`MIN_MODE_SHARE` of the passage's time."""
    return [s for s in shares if s["share"] >= MIN_MODE_SHARE]


def unlisted_modes_text(score: float) -> str:
    """What a passage's modes column in the table says when no mode holds :data:`MIN_MODE_SHARE`
    of it: ``"each <5%"`` when it still scores (held on modes, none long enough to list), else ``""``."""
    return f"each <{100 * MIN_MODE_SHARE:.0f}%" if score > 0 else ""


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
