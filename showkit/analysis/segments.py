"""Passages from the music's own structure, boundaries on beats where there are beats.

Novelty-based segmentation (J. Foote, "Automatic audio segmentation using a
measure of audio novelty", ICME 2000; DEVELOPERS.md Methods §8a).  Each frame
is described from four sides, each group standardised over the track and
weighted equally (a multi-feature self-similarity as surveyed by J. Paulus,
M. Mueller & A. Klapuri, "Audio-based music structure analysis", ISMIR 2010):

- timbre: the cepstrum of the log band energies (coefficients 1 to
  :data:`CEPSTRUM_COEFFS`, an MFCC-like envelope without the level:
  S. Davis & P. Mermelstein, IEEE TASSP 28(4), 357-366, 1980);
- harmony: a chroma vector, the notes found per frame folded onto the twelve
  pitch classes, weighted by amplitude (T. Fujishima, ICMC 1999);
- rhythm: the mean and spread of the percussive onset strength in the block,
  relative to the track's own onsets (level-independent);
- sustain: the share of the energy that is held (harmonic).

The frames are pooled into blocks of about a quarter second, the cosine
self-similarity of the blocks is formed in the band near the diagonal that the
kernel reads (linear in the track's length; :func:`banded_novelty`), and a
Gaussian-tapered checkerboard kernel of half-width :data:`KERNEL_HALF_S`
(suited to passages of 10-40 s) slid along the diagonal gives a novelty curve
whose peaks are the places where the music changes character.  A peak becomes
a boundary when it stands above :data:`NOVELTY_FLOOR` and above
:data:`ADAPT_RATIO` times the curve's running median over
:data:`ADAPT_WINDOW_S` (an adaptive threshold: M. Mueller, *Fundamentals of
Music Processing*, Springer 2015, §6.1), at least :data:`MIN_PASSAGE_S`
apart; passages longer than :data:`MAX_PASSAGE_S` are cut evenly.  Each
boundary is then moved to the strongest change of a narrower kernel
(:data:`REFINE_HALF_S`) within :data:`REFINE_S` of it.

Beats: the tempo is the strongest lag of the onset strength's autocorrelation
between 60 and 180 beats per minute and the beat phase the offset whose comb
collects the most onset strength (a fixed-tempo form of the comb methods of
E. D. Scheirer, JASA 103(1), 588-601, 1998).  When that lag stands out (a
track with beats), beats are kept where there is onset strength near them,
and each boundary moves to the nearest beat within :data:`SNAP_S`.
"""

from __future__ import annotations

import numpy as np

from showkit.analysis.features import TrackFeatures
from showkit.physics.pitch import A4_HZ, A4_MIDI, hz_to_midi

#: Shortest passage, s (project's choice: long enough for a pattern to be seen).
MIN_PASSAGE_S = 6.0
#: Longest passage, s; longer ones are cut evenly.
MAX_PASSAGE_S = 30.0
#: Feature blocks per second for the self-similarity matrix.
BLOCK_RATE_HZ = 4.0
#: Half-width of the checkerboard kernel, s (project's choice: changes between passages of 10-40 s;
#: measured on two medleys of the real-music test set, 3 s split pieces at their inner phrases).
KERNEL_HALF_S = 5.0
#: Novelty peaks below this (0 to 1, normalised by the kernel's weight) are ignored.
NOVELTY_FLOOR = 0.085
#: A peak must also reach this multiple of the novelty's running median (adaptive threshold).
ADAPT_RATIO = 1.5
#: Window of that running median, s.
ADAPT_WINDOW_S = 30.0
#: Half-width of the narrower kernel that places each boundary, s.
REFINE_HALF_S = 2.0
#: A boundary moves to the narrower kernel's strongest change no farther than this, s.
REFINE_S = 0.5
#: Cepstral coefficients of the band energies kept for the timbre (1 to this; 0, the level, is left out).
CEPSTRUM_COEFFS = 12
#: A boundary moves to a beat no farther than this, s.
SNAP_S = 0.3
#: Tempo range searched, beats per minute.
TEMPO_RANGE_BPM = (60.0, 180.0)
#: A beat is kept where the onset strength within 2 frames reaches this fraction of its 95th percentile.
BEAT_PRESENCE = 0.2
#: Normalised autocorrelation at the beat lag needed to say the track has beats.
BEAT_STRENGTH = 0.3


def _pool(data: np.ndarray, per: int) -> np.ndarray:
    """Means over consecutive groups of ``per`` rows (a trailing partial group is dropped)."""
    count = data.shape[0] // per
    return data[:count * per].reshape(count, per, -1).mean(axis=1)


def _standardise(group: np.ndarray) -> np.ndarray:
    """Each column to zero mean and unit spread (constant columns to 0), the group to unit weight."""
    std = group.std(axis=0)
    ok = std > 1e-6
    z = np.where(ok, (group - group.mean(axis=0)) / np.where(ok, std, 1.0), 0.0)
    return z / np.sqrt(group.shape[1])


def chroma(notes_hz: np.ndarray, notes_energy: np.ndarray) -> np.ndarray:
    """Per frame, the amplitude of the notes found in each of the 12 pitch classes (A = 0).

    Parameters
    ----------
    notes_hz : ndarray (F, N)
        Fundamentals, Hz (NaN for none).
    notes_energy : ndarray (F, N)
        Their energies (any unit); the amplitude is the square root.
    """
    hz = np.asarray(notes_hz, dtype=float)
    amp = np.sqrt(np.maximum(np.nan_to_num(np.asarray(notes_energy, dtype=float)), 0.0))
    ok = np.isfinite(hz) & (hz > 0) & (amp > 0)
    pc = np.mod(np.rint(hz_to_midi(np.where(ok, hz, A4_HZ)) - A4_MIDI), 12).astype(int)  # A = 0
    out = np.zeros((hz.shape[0], 12))
    rows = np.broadcast_to(np.arange(hz.shape[0])[:, None], hz.shape)
    np.add.at(out, (rows[ok], pc[ok]), amp[ok])
    return out


def block_features(features: TrackFeatures) -> tuple[np.ndarray, int]:
    """Timbre, harmony, rhythm and sustain pooled in blocks, each group standardised and weighted
    equally; returns ``(blocks, frames_per_block)``."""
    from scipy.fft import dct

    per = max(1, int(round(features.frame_rate_hz / BLOCK_RATE_HZ)))
    if features.frames // per == 0:
        return np.zeros((0, CEPSTRUM_COEFFS + 12 + 3)), per
    cep = dct(np.asarray(features.bands, dtype=float), type=2, norm="ortho", axis=1)
    timbre = _pool(cep[:, 1:CEPSTRUM_COEFFS + 1], per)
    harmony = _pool(chroma(features.notes_hz, features.notes_energy), per)
    harmony = harmony / np.maximum(harmony.sum(axis=1, keepdims=True), 1e-12)
    onset = np.asarray(features.onset, dtype=float)
    top = float(np.percentile(onset, 95)) if onset.size else 0.0
    lg = np.log1p(10.0 * onset / top)[:, None] if top > 0 else np.zeros((onset.size, 1))
    mean = _pool(lg, per)
    spread = np.sqrt(np.maximum(_pool(lg ** 2, per) - mean ** 2, 0.0))
    rhythm = np.hstack([mean, spread])
    sustain = _pool(np.asarray(features.harmonic_share, dtype=float)[:, None], per)
    blocks = np.hstack([_standardise(g) for g in (timbre, harmony, rhythm, sustain)])
    return blocks, per


def self_similarity(blocks: np.ndarray) -> np.ndarray:
    """Cosine similarity of every pair of feature blocks (-1 to 1; 0 for empty blocks)."""
    norm = np.linalg.norm(blocks, axis=1)
    unit = blocks / np.where(norm > 0, norm, 1.0)[:, None]
    return unit @ unit.T


def checkerboard(half: int) -> np.ndarray:
    """Gaussian-tapered checkerboard kernel of size ``2 half`` (Foote 2000), sum of |K| = 1."""
    x = np.arange(-half, half) + 0.5
    taper = np.exp(-0.5 * (x / (0.5 * half)) ** 2)
    kernel = np.sign(x)[:, None] * np.sign(x)[None, :] * taper[:, None] * taper[None, :]
    return kernel / np.abs(kernel).sum()


def novelty(similarity: np.ndarray, half: int) -> np.ndarray:
    """Foote novelty at every block boundary: the checkerboard correlated along the diagonal.

    ``novelty[t]`` measures the change between the blocks before ``t`` and
    those from ``t`` on (0 to 1 for cosine similarities; negative values are
    clipped).
    """
    n = similarity.shape[0]
    if n == 0:
        return np.zeros(0)
    kernel = checkerboard(half)
    padded = np.zeros((n + 2 * half, n + 2 * half))
    padded[half:half + n, half:half + n] = similarity
    t = np.arange(n)
    out = np.zeros(n)
    for i in range(2 * half):
        rows = padded[t + i]  # (n, n + 2 half)
        cols = t[:, None] + np.arange(2 * half)[None, :]
        out += np.einsum("tj,j->t", np.take_along_axis(rows, cols, axis=1), kernel[i])
    return np.maximum(out, 0.0) / 2.0


def banded_novelty(blocks: np.ndarray, half: int) -> np.ndarray:
    """:func:`novelty` of the cosine self-similarity of ``blocks``, from the band the kernel reads.

    The checkerboard of size ``2 half`` slid along the diagonal only ever
    reads similarities of blocks fewer than ``2 half`` apart, so only those
    ``4 half - 1`` diagonals are formed (each a row-wise dot product of the
    unit blocks with the blocks ``d`` later): memory and time grow linearly
    with the track's length instead of with its square (a 60-minute track
    has 14 400 blocks: the full matrix is 1.7 GB in float64 and the steps
    that used it peaked at about 6 GB).  Same values as
    ``novelty(self_similarity(blocks), half)`` to rounding (tests/test_segments.py).
    """
    n = blocks.shape[0]
    if n == 0:
        return np.zeros(0)
    norm = np.linalg.norm(blocks, axis=1)
    unit = blocks / np.where(norm > 0, norm, 1.0)[:, None]
    w = 2 * half
    length = n + w  # the zero-padded similarity of novelty() is (n + 2 half) square
    padded = np.zeros((length, blocks.shape[1]))
    padded[half:half + n] = unit
    diag = {}
    for d in range(-(w - 1), w):
        v = np.zeros(length)
        if d >= 0:
            v[:length - d] = np.einsum("ij,ij->i", padded[:length - d], padded[d:])
        else:
            v[-d:] = np.einsum("ij,ij->i", padded[-d:], padded[:length + d])
        diag[d] = v
    kernel = checkerboard(half)
    out = np.zeros(n)
    for d in range(-(w - 1), w):  # the kernel's diagonal d reads the similarities d blocks apart
        i0, i1 = max(0, -d), min(w, w - d)
        taps = kernel[np.arange(i0, i1), np.arange(i0, i1) + d]
        out += np.correlate(diag[d][i0:i1 - 1 + n], taps, mode="valid")
    return np.maximum(out, 0.0) / 2.0


def pick_peaks(curve: np.ndarray, spacing: int, height) -> np.ndarray:
    """The local maxima of ``curve`` (block indices, ascending) that reach ``height`` there, at
    least ``spacing`` blocks apart, the higher kept first.

    The rule of ``scipy.signal.find_peaks`` with ``height`` and ``distance`` (P. Virtanen et
    al., "SciPy 1.0", Nature Methods 17, 261-272, 2020): a peak is a maximum of the curve
    itself (the middle of a flat top; never the first or last block), judged against the
    threshold only where it stands, so a slope that crosses a rising threshold is no peak
    (the curve's values below the threshold are not set to zero first, which made the last
    value above it look like one); then, highest first, each kept peak removes the others
    closer than ``spacing``.  Written here because importing ``scipy.signal`` costs every
    scanning process about 1.2 s of CPU (scipy 1.16: 1.9 s for numpy + scipy.signal against
    0.7 s for the scipy modules the scan uses otherwise), more than the analysis of a
    short track; ``tests/test_segments.py`` checks it against ``find_peaks`` itself.

    Parameters
    ----------
    curve : ndarray
        The novelty per block (0 to 1).
    spacing : int
        Fewest blocks between two peaks (>= 1).
    height : float or ndarray or None
        The value a peak must reach, one for all blocks or one per block (None: any).
    """
    curve = np.asarray(curve, dtype=float)
    if curve.size < 3:
        return np.zeros(0, dtype=int)
    # local maxima: a rise, a flat top of any length, then a fall; the top's middle block
    steps = np.flatnonzero(curve[1:] != curve[:-1])  # not diff(): inf - inf is NaN, a "step"
    rise_fall = (curve[steps[:-1] + 1] > curve[steps[:-1]]) & (curve[steps[1:] + 1] < curve[steps[1:]])
    peaks = (steps[:-1][rise_fall] + 1 + steps[1:][rise_fall]) // 2
    floor = np.broadcast_to(np.asarray(-np.inf if height is None else height, dtype=float), curve.shape)
    peaks = peaks[curve[peaks] >= floor[peaks]]
    spacing = max(1, int(spacing))
    if spacing > 1 and peaks.size > 1:
        keep = np.ones(peaks.size, dtype=bool)
        for j in np.argsort(curve[peaks])[::-1]:  # a loop over the peaks (a few per minute), highest first
            if keep[j]:
                near = np.abs(peaks - peaks[j]) < spacing
                near[j] = False
                keep[near] = False
        peaks = peaks[keep]
    return peaks.astype(int)


def threshold(curve: np.ndarray, block_s: float) -> np.ndarray:
    """Per block, the novelty a peak must reach: :data:`NOVELTY_FLOOR`, and :data:`ADAPT_RATIO`
    times the curve's running median over :data:`ADAPT_WINDOW_S` (``block_s``: block length, s)."""
    from scipy.ndimage import median_filter

    if curve.size == 0:
        return np.zeros(0)
    size = max(3, int(round(ADAPT_WINDOW_S / block_s)) | 1)
    return np.maximum(NOVELTY_FLOOR, ADAPT_RATIO * median_filter(curve, size=size, mode="nearest"))


def refine(blocks: np.ndarray, peaks: np.ndarray, block_s: float) -> np.ndarray:
    """Each peak moved to the strongest novelty of a kernel of half-width :data:`REFINE_HALF_S`
    within :data:`REFINE_S` of it (``block_s``: block length, s); same order and count."""
    if peaks.size == 0:
        return peaks
    fine = banded_novelty(blocks, max(2, int(round(REFINE_HALF_S / block_s))))
    reach = int(round(REFINE_S / block_s))
    offsets = np.arange(-reach, reach + 1)
    idx = np.clip(peaks[:, None] + offsets[None, :], 0, fine.size - 1)
    return idx[np.arange(peaks.size), np.argmax(fine[idx], axis=1)]


def beat_times(onset: np.ndarray, frame_rate_hz: float) -> np.ndarray:
    """Beat times (s) of a steady beat in the onset strength, or an empty array when there is none."""
    x = np.asarray(onset, dtype=float)
    x = x - x.mean() if x.size else x
    lo = int(round(frame_rate_hz * 60.0 / TEMPO_RANGE_BPM[1]))
    hi = int(round(frame_rate_hz * 60.0 / TEMPO_RANGE_BPM[0]))
    if x.size < 4 * hi or not np.any(x):
        return np.zeros(0)
    n = 1 << int(np.ceil(np.log2(2 * x.size)))
    spec = np.fft.rfft(x, n)
    ac = np.fft.irfft(spec * np.conj(spec), n)[:hi + 1]
    if ac[0] <= 0:
        return np.zeros(0)
    ac = ac / ac[0] * x.size / (x.size - np.arange(hi + 1))  # unbiased
    lag = lo + int(np.argmax(ac[lo:hi + 1]))
    if ac[lag] < BEAT_STRENGTH:
        return np.zeros(0)
    count = x.size // lag
    comb = x[:count * lag].reshape(count, lag).sum(axis=0)
    phase = int(np.argmax(comb))
    beats = phase + lag * np.arange((x.size - phase + lag - 1) // lag)
    # keep the beats where there is onset strength near them (a track may have beats in parts only)
    raw = np.asarray(onset, dtype=float)
    near = np.max(np.stack([raw[np.clip(beats + d, 0, raw.size - 1)] for d in range(-2, 3)]), axis=0)
    beats = beats[near >= BEAT_PRESENCE * np.percentile(raw, 95)]
    return beats / frame_rate_hz


def _snap(times: np.ndarray, beats: np.ndarray) -> np.ndarray:
    if beats.size == 0 or times.size == 0:
        return times
    j = np.clip(np.searchsorted(beats, times), 1, max(1, beats.size - 1))
    near = np.where(np.abs(beats[j - 1] - times) < np.abs(beats[np.minimum(j, beats.size - 1)] - times),
                    beats[j - 1], beats[np.minimum(j, beats.size - 1)])
    return np.where(np.abs(near - times) <= SNAP_S, near, times)


def _limit(edges: list[float], strength: dict, duration_s: float) -> list[float]:
    """Merge passages shorter than the minimum (drop the weaker edge), cut long ones evenly."""
    edges = sorted(set(edges))
    while len(edges) > 2:
        lengths = np.diff(edges)
        k = int(np.argmin(lengths))
        if lengths[k] >= MIN_PASSAGE_S:
            break
        # drop the inner edge of the short passage with the smaller novelty
        inner = [i for i in (k, k + 1) if 0 < i < len(edges) - 1]
        drop = min(inner, key=lambda i: strength.get(edges[i], 0.0))
        edges.pop(drop)
    out = [edges[0]]
    for a, b in zip(edges[:-1], edges[1:]):
        parts = int(np.ceil((b - a) / MAX_PASSAGE_S - 1e-9))
        out += list(np.linspace(a, b, parts + 1)[1:]) if parts > 1 else [b]
    return [float(e) for e in out]


def passages(features: TrackFeatures, duration_s: float) -> tuple[list[tuple[float, float]], np.ndarray]:
    """Passages ``[(start_s, end_s), ...]`` covering the track, and the beat times found.

    Parameters
    ----------
    features : TrackFeatures
    duration_s : float
        Length of the track, s.
    """
    beats = beat_times(features.onset, features.frame_rate_hz)
    blocks, per = block_features(features)
    block_s = per / features.frame_rate_hz
    half = max(2, int(round(KERNEL_HALF_S / block_s)))
    curve = banded_novelty(blocks, half) if blocks.shape[0] else np.zeros(0)
    peaks = pick_peaks(curve, max(1, int(round(MIN_PASSAGE_S / block_s))), threshold(curve, block_s))
    peaks = refine(blocks, peaks, block_s)
    times = _snap(peaks * block_s, beats)
    inner = [float(t) for t in times if MIN_PASSAGE_S * 0.5 <= t <= duration_s - MIN_PASSAGE_S * 0.5]
    strength = {float(t): float(curve[p]) for t, p in zip(times, peaks)}
    edges = _limit([0.0] + inner + [float(duration_s)], strength, float(duration_s))
    return list(zip(edges[:-1], edges[1:])), beats
