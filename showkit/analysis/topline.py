"""The top line of the texture: a small trained network's word on which found note is the highest.

A stack of constant-Q spectra read at the harmonics of each candidate pitch
(the harmonic CQT of R. Bittner, B. McFee, J. Salamon, P. Li and J. P. Bello,
"Deep salience representations for F0 estimation in polyphonic music", ISMIR
2017) is fed to a small convolutional network along log frequency that gives
each pitch bin a log posterior of being the frame's highest sounding note;
:func:`frame_logp` gives it for every frame of a track, and
:func:`showkit.analysis.pitches.dominant_pitch` adds it to the found notes' scores
(DEVELOPERS.md Methods §8b, with the measured gain and its limits).  Weights:
``showkit/data/topline_weights.npz``, trained by
``tests/benchmarks/train_line_model.py`` on public-domain scores rendered through
soundfonts the tests never use and on invented synthesized timbres.  Inference
is numpy only.
"""

from __future__ import annotations

from functools import lru_cache
from pathlib import Path

import numpy as np

from showkit.errors import ShowkitError

#: Rate the audio is resampled to, Hz, and the constant-Q hop, samples.
LINE_RATE_HZ = 22050
LINE_HOP = 256
#: Constant-Q bins per octave, and the lowest bin's MIDI note (C1, 32.7 Hz).
BINS_PER_OCTAVE = 36
CQT_LOW_MIDI = 24
#: Output bins: the pitches the line may take, MIDI 36 (C2) upwards in thirds of a semitone.
OUT_LOW_MIDI = 36
OUT_BINS = 174
#: The harmonics stacked (0.5: the sub-octave), and their bin offsets.
HARMONICS = (0.5, 1.0, 2.0, 3.0, 4.0, 5.0)
_H_OFFSET = tuple(int(round(BINS_PER_OCTAVE * np.log2(h))) for h in HARMONICS)
_BASE = (OUT_LOW_MIDI - CQT_LOW_MIDI) * BINS_PER_OCTAVE // 12
CQT_BINS = _BASE + max(_H_OFFSET) + OUT_BINS
#: Context: constant-Q frames taken around each frame (offsets, in hops).
CONTEXT = (-16, -8, -4, -2, 0, 2, 4, 8, 16)
#: Shortest signal handed to the constant-Q transform (shorter ones get zeros after them), samples.
MIN_CQT_SAMPLES = 4 * LINE_RATE_HZ
#: Level floor of the input, dB below the frame's strongest bin.
FLOOR_DB = 60.0
#: The weights file.
WEIGHTS = Path(__file__).resolve().parent.parent / "data" / "topline_weights.npz"


def out_hz() -> np.ndarray:
    """Centre frequency of each output bin, Hz."""
    midi = OUT_LOW_MIDI + np.arange(OUT_BINS) * 12.0 / BINS_PER_OCTAVE
    return 440.0 * 2.0 ** ((midi - 69.0) / 12.0)


def cqt_db(samples: np.ndarray, rate_hz: int) -> np.ndarray:
    """Log-magnitude constant-Q spectrogram (frames, CQT_BINS), dB re each frame's strongest bin, clipped.

    :func:`showkit.analysis.constantq.cqt_magnitude` at A440 (no tuning estimate): the
    shipped weights were trained on librosa's ``vqt`` with its per-excerpt tuning estimate,
    and reading at A440 gave the same raw pitch accuracy on both evaluation sets (DEVELOPERS.md
    Methods §8b).
    """
    import soxr

    from showkit.analysis.constantq import cqt_magnitude

    x = np.asarray(samples, dtype=np.float32)
    if rate_hz != LINE_RATE_HZ:
        x = soxr.resample(x, rate_hz, LINE_RATE_HZ)
    rows = 1 + x.size // LINE_HOP
    if x.size < MIN_CQT_SAMPLES:      # as trained: short signals get zeros after them
        x = np.concatenate([x, np.zeros(MIN_CQT_SAMPLES - x.size, dtype=np.float32)])
    fmin = 440.0 * 2.0 ** ((CQT_LOW_MIDI - 69.0) / 12.0)
    c = cqt_magnitude(x, LINE_RATE_HZ, LINE_HOP, fmin, CQT_BINS, BINS_PER_OCTAVE)[:rows]
    db = 20.0 * np.log10(c + np.float32(1e-7))
    db -= db.max(axis=1, keepdims=True)
    return np.maximum(db, np.float32(-FLOOR_DB))


def line_input(db: np.ndarray, times_s: np.ndarray, context=CONTEXT) -> np.ndarray:
    """Network input (frames, channels, OUT_BINS), 0..1, for the given times (s)."""
    idx = np.rint(np.asarray(times_s, dtype=float) * LINE_RATE_HZ / LINE_HOP).astype(int)
    n = db.shape[0]
    return gather_input(db, np.clip(idx, 0, n - 1), np.zeros_like(idx), np.full_like(idx, n - 1), context)


def gather_input(db: np.ndarray, idx: np.ndarray, lo: np.ndarray, hi: np.ndarray, context=CONTEXT) -> np.ndarray:
    """:func:`line_input` for rows ``idx`` of ``db``, each with its context clipped to ``[lo, hi]``."""
    chans = []
    for dt in context:
        rows = db[np.clip(idx + dt, lo, hi)]
        for off in _H_OFFSET:
            start = _BASE + off
            chans.append(rows[:, start:start + OUT_BINS])
    return (np.stack(chans, axis=1).astype(np.float32) / FLOOR_DB + 1.0).astype(np.float32)


def _conv_last(x: np.ndarray, w: np.ndarray, b: np.ndarray, dilation: int) -> np.ndarray:
    """'Same' 1-D cross-correlation along the bins (as torch.nn.Conv1d), channels last:
    x (frames, bins, cin), w (cout, cin, k) -> (frames, bins, cout); one matrix product over the
    stacked shifted inputs (im2col)."""
    cout, cin, k = w.shape
    frames, bins, _ = x.shape
    pad = dilation * (k - 1) // 2
    xp = np.zeros((frames, bins + 2 * pad, cin), dtype=np.float32)
    xp[:, pad:pad + bins] = x
    cols = np.concatenate([xp[:, j * dilation:j * dilation + bins] for j in range(k)], axis=2)
    wm = np.ascontiguousarray(w.transpose(2, 1, 0).reshape(k * cin, cout), dtype=np.float32)
    return (cols.reshape(frames * bins, k * cin) @ wm).reshape(frames, bins, cout) + b


class Net:
    """The trained network: its layers ``[(w, b, dilation)]`` and the context frames it reads."""

    def __init__(self, layers: list, context: tuple):
        self.layers, self.context = layers, context


def load_weights(path: Path = WEIGHTS) -> Net:
    """The network in the weights file (kept after the first read of the installed one).

    A missing or damaged file is an error (reinstall), never a line without the network's word.
    """
    return _load(str(path))


@lru_cache(maxsize=2)
def _load(path: str) -> Net:
    try:
        with np.load(path) as z:
            n = int(z["layers"])
            layers = [(z[f"w{i}"].astype(np.float32), z[f"b{i}"].astype(np.float32), int(z[f"d{i}"]))
                      for i in range(n)]
            context = tuple(int(c) for c in z["context"])
    except Exception as exc:  # noqa: BLE001 -- any failure to read the package's own file says the same
        raise ShowkitError(f"the top-line network's weights cannot be read ({type(exc).__name__})", path,
                           "reinstall showkit") from None
    channels = len(context) * len(HARMONICS)
    if (not layers or layers[0][0].shape[1] != channels or layers[-1][0].shape[0] != 1
            or not all(np.all(np.isfinite(w)) and np.all(np.isfinite(b)) and d >= 1 for w, b, d in layers)):
        raise ShowkitError("the top-line network's weights are damaged (shapes or values)", path,
                           "reinstall showkit")
    for w, b, _ in layers:
        w.flags.writeable = False
        b.flags.writeable = False
    return Net(layers, context)


def log_posterior(x: np.ndarray, net: Net) -> np.ndarray:
    """Log-probability of each output bin being the frame's top note (frames, OUT_BINS)."""
    h = np.ascontiguousarray(np.asarray(x, dtype=np.float32).transpose(0, 2, 1))
    for i, (w, b, d) in enumerate(net.layers):
        h = _conv_last(h, w, b, d)
        if i < len(net.layers) - 1:
            np.maximum(h, 0.0, out=h)
    z = h[:, :, 0]
    z = z - z.max(axis=1, keepdims=True)
    return z - np.log(np.exp(z).sum(axis=1, keepdims=True))


#: The file is analysed in pieces this long (s), each with this margin either side (s): memory stays bounded.
CHUNK_S = 30.0
MARGIN_S = 3.0


#: Log posterior given to a pitch outside the network's range (and to a non-finite value).
IMPROBABLE = -30.0


def at_notes(logp: np.ndarray, notes_hz: np.ndarray, outside: float = IMPROBABLE) -> np.ndarray:
    """Each note's log posterior (frames, notes): the value of its nearest output bin (``outside`` off the range)."""
    f = np.asarray(notes_hz, dtype=float)
    ok = np.isfinite(f) & (f > 0)
    with np.errstate(divide="ignore", invalid="ignore"):
        b = np.rint((12.0 * np.log2(np.where(ok, f, 440.0) / 440.0) + 69.0 - OUT_LOW_MIDI)
                    * BINS_PER_OCTAVE / 12.0).astype(int)
    inside = ok & (b >= 0) & (b < OUT_BINS)
    got = np.take_along_axis(logp, np.clip(b, 0, OUT_BINS - 1), axis=1)
    return np.where(inside, got, outside).astype(np.float32)


#: Frames per pass through the network: small batches keep each layer's stacked input in cache
#: (measured, one core, 3600 frames: 1.2 s in batches of 16-32, 1.7 s of 64, 5.3 s all at once).
BATCH_FRAMES = 32


def _batched(db: np.ndarray, idx: np.ndarray, net: Net) -> np.ndarray:
    """The network's log posteriors for rows ``idx`` of ``db``, :data:`BATCH_FRAMES` at a time."""
    lo = np.zeros(BATCH_FRAMES, dtype=int)
    hi = np.full(BATCH_FRAMES, db.shape[0] - 1)
    out = np.empty((idx.size, OUT_BINS), dtype=np.float32)
    for i in range(0, idx.size, BATCH_FRAMES):
        j = idx[i:i + BATCH_FRAMES]
        out[i:i + j.size] = log_posterior(gather_input(db, j, lo[:j.size], hi[:j.size], net.context), net)
    return out


def frame_logp(blocks, times_s: np.ndarray, net: Net | None = None) -> np.ndarray:
    """Log posterior of every output bin being the frame's top note (frames, OUT_BINS), float32.

    ``blocks`` yields mono sample blocks at :data:`LINE_RATE_HZ` (e.g.
    :func:`showkit.analysis.audio.read_blocks`); the track is analysed
    :data:`CHUNK_S` at a time with :data:`MARGIN_S` either side, so the audio
    held is bounded whatever the track's length (the result is 0.7 kB per frame).
    """
    net = load_weights() if net is None else net
    pos = np.asarray(times_s, dtype=float) * LINE_RATE_HZ       # frame centres, samples
    out = np.zeros((pos.size, OUT_BINS), dtype=np.float32)
    chunk = int(CHUNK_S * LINE_RATE_HZ) // LINE_HOP * LINE_HOP
    margin = int(MARGIN_S * LINE_RATE_HZ) // LINE_HOP * LINE_HOP
    parts: list = []
    have = 0             # samples held in parts
    start = 0            # global index of the first sample held
    core = 0             # start of the next core segment

    def run(last: bool) -> None:
        nonlocal parts, have, start, core
        buf = np.concatenate(parts) if len(parts) > 1 else parts[0]
        end = start + buf.size
        while core < end and (last or end >= core + chunk + margin):
            lo = max(core - margin, 0)
            hi = end if last else core + chunk + margin
            db = cqt_db(buf[lo - start:hi - start], LINE_RATE_HZ)
            sel = (pos >= core) & ((pos < core + chunk) | (last and core + chunk >= end))
            if sel.any():
                idx = np.clip(np.rint(pos[sel] / LINE_HOP).astype(int) - lo // LINE_HOP, 0, db.shape[0] - 1)
                out[sel] = _batched(db, idx, net)
            core += chunk
        keep = max(core - margin, start)
        parts = [buf[keep - start:]]
        have = parts[0].size
        start = keep

    for blk in blocks:
        parts.append(np.asarray(blk, dtype=np.float32))
        have += parts[-1].size
        if start + have >= core + chunk + margin:
            run(False)
    if have:
        run(True)
    return out


#: The network's own path through its bins: step cost per semitone between frames, and its cap.
STEP_COST = 0.35
STEP_CAP_SEMITONES = 6.0


def own_path_hz(logp: np.ndarray) -> np.ndarray:
    """The network's own line, Hz per frame: the best path through its bins (Viterbi decoding,
    a step costing :data:`STEP_COST` per semitone up to :data:`STEP_CAP_SEMITONES`)."""
    from showkit.analysis.pitches import viterbi

    frames, k = logp.shape
    if frames == 0:
        return np.zeros(0)
    semis = np.arange(k) * 12.0 / BINS_PER_OCTAVE
    cost = STEP_COST * np.minimum(np.abs(semis[:, None] - semis[None, :]), STEP_CAP_SEMITONES)
    return out_hz()[viterbi(logp, lambda t: cost)]
