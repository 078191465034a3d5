"""The tube's modes as a table, and the dominant pitch of each frame.

:class:`ModeTable` holds the rig's modes as arrays: frequency, Q, the
half-power half-width ``f_n / (2 Q)`` in cents (DEVELOPERS.md Methods §8) and
whether the holes resolve the mode's pattern.  The notes themselves are
found by :mod:`showkit.analysis.multipitch`; :func:`dominant_pitch` picks the
line a listener follows from them (checked against the melody of rendered
public-domain scores with ``mir_eval.melody`` in the real-music tests).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Half-width used for a mode whose Q is unknown (too broad to have half-power points), cents.
BROAD_HALF_WIDTH_CENTS = 50.0
#: The dominant line (DEVELOPERS.md Methods §8b): log-score per e-fold of a note's energy relative to
#: the frame's strongest note ...
DOMINANT_ENERGY_WEIGHT = 0.25
#: ... per octave of the note's height (the top line of the texture is the melody) ...
DOMINANT_HEIGHT_WEIGHT = 1.0
#: ... and the cost of a jump between consecutive frames, per semitone ...
DOMINANT_JUMP_WEIGHT = 0.5
#: ... counted up to this many semitones (a leap costs no more than this).
DOMINANT_JUMP_CAP_SEMITONES = 5.0
#: Reference of the height term, Hz (only differences of height matter).
DOMINANT_HEIGHT_REF_HZ = 100.0
#: Weight of the trained network's log posterior that a note is the frame's top note
#: (:mod:`showkit.analysis.topline`), when it is given ...
DOMINANT_NETWORK_WEIGHT = 0.3
#: ... the network's best pitch joins each frame's candidates on a track where its own line agrees
#: (within 50 cents) with this line on at least this share of the frames ...
DOMINANT_NETWORK_AGREEMENT = 0.5
#: ... its score lowered by this much.
DOMINANT_NETWORK_OWN_PENALTY = 2.0


@dataclass(frozen=True)
class ModeTable:
    """The rig's modes as arrays, for mapping pitches.

    Attributes
    ----------
    n : ndarray of int
    freq_hz : ndarray
    q : ndarray
        Quality factor (NaN when too broad to measure).
    half_width_cents : ndarray
        Half of the half-power band ``f_n / Q`` in cents (``BROAD_HALF_WIDTH_CENTS``
        when Q is unknown).
    readable : ndarray of bool
        The pattern of the mode can be read in the flames.
    notes : tuple of str
    """

    n: np.ndarray
    freq_hz: np.ndarray
    q: np.ndarray
    half_width_cents: np.ndarray
    readable: np.ndarray
    notes: tuple

    @classmethod
    def from_modes(cls, modes) -> "ModeTable":
        """From :func:`showkit.physics.modes.find_modes` output (sorted by frequency)."""
        modes = sorted(modes, key=lambda m: m.frequency_hz)
        freq = np.array([m.frequency_hz for m in modes], dtype=float)
        half = np.array([BROAD_HALF_WIDTH_CENTS if m.q is None else
                         1200.0 * np.log2(1.0 + 0.5 / m.q) for m in modes], dtype=float)
        return cls(n=np.array([m.n for m in modes], dtype=int), freq_hz=freq,
                   q=np.array([np.nan if m.q is None else m.q for m in modes], dtype=float),
                   half_width_cents=half,
                   readable=np.array([m.pattern == "readable" for m in modes], dtype=bool),
                   notes=tuple(m.note for m in modes))

    def index_of(self, n: int) -> int:
        return int(np.nonzero(self.n == n)[0][0])


def dominant_pitch(notes_hz: np.ndarray, notes_energy: np.ndarray, top_logp: np.ndarray | None = None
                   ) -> np.ndarray:
    """The dominant pitch of each frame, Hz (NaN for a frame without notes).

    The line a listener follows through the frames' notes, decoded as the
    best path through a lattice of each frame's notes (Viterbi decoding of
    pitch candidates as in pYIN: M. Mauch and S. Dixon, "pYIN: a fundamental
    frequency estimator using probabilistic threshold distributions", ICASSP
    2014; DEVELOPERS.md Methods §8b).  A note scores
    ``DOMINANT_ENERGY_WEIGHT ln(E / E_max) + DOMINANT_HEIGHT_WEIGHT log2(f / f_ref)``
    (salient and high, the cues of melody selection in J. Salamon and
    E. Gómez, "Melody extraction from polyphonic music signals using pitch
    contour characteristics", IEEE TASLP 20(6), 2012), and a step from one
    frame to the next costs ``DOMINANT_JUMP_WEIGHT`` per semitone, at most
    :data:`DOMINANT_JUMP_CAP_SEMITONES` semitones' worth.  Continuity keeps
    the line on a decaying piano note under newer, louder accompaniment and
    off the upper partials that flicker in and out of the note list.

    With the trained network's output (``top_logp``) each note also scores
    ``DOMINANT_NETWORK_WEIGHT`` times the network's log posterior at its
    pitch; and where the network's own line agrees with that line on at least
    :data:`DOMINANT_NETWORK_AGREEMENT` of the frames, the network's best pitch
    of each frame joins the candidates (a note the search did not find, often
    one hidden on a lower note's partial), scored like a note of the frame's
    least energy, less :data:`DOMINANT_NETWORK_OWN_PENALTY`.

    Parameters
    ----------
    notes_hz : ndarray (frames, notes)
        Frequencies of the notes found, Hz (NaN for none).
    notes_energy : ndarray (frames, notes)
        Energy of each note's partials (any unit; only ratios within a frame matter).
    top_logp : ndarray (frames, bins), optional
        The network's log posterior per output bin and frame
        (:func:`showkit.analysis.topline.frame_logp`); non-finite values count as
        improbable.
    """
    f = np.asarray(notes_hz, dtype=float)
    e = np.asarray(notes_energy, dtype=float)
    if f.ndim != 2 or f.shape[1] == 0 or f.shape[0] == 0:
        return np.full(f.shape[0] if f.ndim else 0, np.nan)
    if top_logp is None:
        return _line(f, e, None, 0.0)
    from showkit.analysis import topline

    lp = np.asarray(top_logp, dtype=np.float32)          # frames x bins: float32 (75 MB for an hour)
    if not np.all(np.isfinite(lp)):
        lp = np.where(np.isfinite(lp), lp, np.float32(topline.IMPROBABLE))
    line = _line(f, e, lp, 0.0)
    v = np.isfinite(line)
    own = topline.own_path_hz(lp)
    with np.errstate(divide="ignore", invalid="ignore"):
        agree = float(np.mean(np.abs(1200.0 * np.log2(own[v] / line[v])) < 50.0)) if v.any() else 0.0
    if agree < DOMINANT_NETWORK_AGREEMENT:
        return line
    best = topline.out_hz()[lp.argmax(axis=1)]
    ok = np.isfinite(f) & (e > 0)
    least = np.min(np.where(ok, e, np.inf), axis=1)
    f2 = np.concatenate([f, best[:, None]], axis=1)
    e2 = np.concatenate([e, np.where(np.isfinite(least), least, 1.0)[:, None]], axis=1)
    out = _line(f2, e2, lp, DOMINANT_NETWORK_OWN_PENALTY)
    return np.where(ok.any(axis=1), out, np.nan)


def _line(f: np.ndarray, e: np.ndarray, lp: np.ndarray | None, own_penalty: float) -> np.ndarray:
    """The Viterbi line through candidates ``f`` (energies ``e``); with the network's ``lp`` its term,
    and ``own_penalty`` off the last candidate (the network's own, when it was added)."""
    ok = np.isfinite(f) & (e > 0)
    peak = np.max(np.where(ok, e, 0.0), axis=1, keepdims=True)
    with np.errstate(divide="ignore", invalid="ignore"):
        share = np.log(np.where(ok, e, 1.0) / np.where(peak > 0, peak, 1.0))
        height = np.log2(np.where(ok, f, 1.0) / DOMINANT_HEIGHT_REF_HZ)
    score = DOMINANT_ENERGY_WEIGHT * share + DOMINANT_HEIGHT_WEIGHT * height
    if lp is not None:
        from showkit.analysis import topline

        score = score + DOMINANT_NETWORK_WEIGHT * topline.at_notes(lp, f)
        if own_penalty:
            score[:, -1] -= own_penalty
    score = np.where(ok, score, -np.inf)
    semitones = 12.0 * np.log2(np.where(ok, f, 1.0))
    path = _best_path(score, semitones, DOMINANT_JUMP_WEIGHT, DOMINANT_JUMP_CAP_SEMITONES)
    rows = np.arange(f.shape[0])
    return np.where(ok[rows, path], f[rows, path], np.nan)


def _best_path(score: np.ndarray, semitones: np.ndarray, jump_weight: float, cap_semitones: float) -> np.ndarray:
    """Viterbi decoding: per frame, the index of the candidate on the best path.

    ``score`` (frames, candidates) is each candidate's log-score (``-inf``: no
    candidate); a step between candidates of consecutive frames costs
    ``jump_weight * min(|semitones difference|, cap_semitones)``.  A frame
    without candidates passes the best path on unchanged.  The step costs of
    all frames are computed at once; the recursion is one small max-plus
    product (candidates x candidates) per frame.
    """
    frames, k = score.shape
    valid = np.isfinite(score)
    empty = ~valid.any(axis=1)
    emit = np.where(valid, score, -1e9)
    emit[empty] = 0.0
    cost = jump_weight * np.minimum(np.abs(semitones[1:, :, None] - semitones[:-1, None, :]), cap_semitones)
    stay = np.where(np.eye(k, dtype=bool), 0.0, 1e9)
    cost[empty[1:]] = stay                                # (to, from): an empty frame keeps the path
    return viterbi(emit, lambda t: cost[t - 1])


def viterbi(emit: np.ndarray, step_cost) -> np.ndarray:
    """The max-plus recursion and backtrack: per frame, the index of the state on the best path.

    ``emit`` (frames, states) are log-scores; ``step_cost(t)`` gives the (to, from)
    cost matrix of the step into frame ``t``.  One small max-plus product per
    frame; back-pointers kept as int16 (at most 32767 states).
    """
    frames, k = emit.shape
    back = np.zeros((frames, k), dtype=np.int16)
    acc = emit[0].astype(np.float64)
    cols = np.arange(k)
    for t in range(1, frames):
        cand = acc - step_cost(t)
        b = cand.argmax(axis=1)
        back[t] = b
        acc = cand[cols, b] + emit[t]
    path = np.zeros(frames, dtype=np.intp)
    path[-1] = int(np.argmax(acc))
    for t in range(frames - 1, 0, -1):
        path[t - 1] = back[t, path[t]]
    return path
