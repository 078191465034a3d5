"""Per-frame facts of a track, the input of segmentation, the mode map and scoring.

One pass over the samples (at the hole filters' rate, one frame per flame
frame, 30 per second) gives, per frame: the energy in the tube's band, how
much of it is sustained (harmonic) rather than percussive, every sounding
note (fundamental frequency to a few cents, the energy of its partials, how
sustained it is), log energies in a few bands and a percussive onset
strength.  Methods: :mod:`showkit.analysis.multipitch` (the notes) and
:mod:`showkit.analysis.spectral` (transform, harmonic/percussive split).

The track is processed in blocks of :data:`spectral.CHUNK_FRAMES` frames;
the harmonic/percussive split reads a margin of frames on each side of a
block, so the result is the same as for the whole track at once, and memory
stays bounded (float32) however long the track is.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from showkit.analysis import multipitch, spectral

#: Log-spaced bands for the segmentation features.
BAND_COUNT = 16
#: Band energies for the segmentation are averaged over this many frames (about 0.4 s).
BAND_SMOOTH_FRAMES = 13
#: A frame whose band energy is below this (dB re a full-scale sine) is silent.
SILENCE_DB = -60.0
#: Spectral amplitudes below a sine at this level (dB re full scale) are ignored by the note search.
WHITEN_FLOOR_DB = -100.0
#: Search the notes with the track's own partial amplitudes (``Estimator.learn_template``, learnt from a
#: first search): a found note cancels only what its timbre explains (DEVELOPERS.md Methods §8b).  Off:
#: on the rendered scores it finds hidden doublings (mode-hit F1 0.740 -> 0.753, unseen pieces 0.728 ->
#: 0.754; dominant line 0.648 -> 0.665, unseen 0.56 -> 0.60) but more upper partials with them
#: (multi-pitch precision 0.627 -> 0.585, unseen 0.673 -> 0.631) and the organ chorale's line falls
#: (0.46 -> 0.39); costs about 0.2 s per 4-minute track.  Turning it on changes the scan: bump SCAN_VERSION.
OWN_TIMBRE = False
#: The first search for the timbre reads every this many frames.
LEARN_EVERY = 4


@dataclass
class TrackFeatures:
    """What the analysis keeps of a track, frame by frame (``F`` frames, ``N`` notes at most).

    Attributes
    ----------
    frame_rate_hz : float
    energy : ndarray (F,)
        Energy in the band, relative to a full-scale sine's (1.0 = 0 dB).
    harmonic_share : ndarray (F,)
        Fraction of the energy that is sustained (0 to 1).
    notes_hz : ndarray (F, N)
        Fundamentals of the notes found, Hz, in the order found (most salient
        first); NaN where there are fewer notes.
    notes_energy : ndarray (F, N)
        Energy of each note's partials in the band (same unit as ``energy``).
    notes_tonal : ndarray (F, N)
        Sustained share at each note's fundamental (0 to 1).
    bands : ndarray (F, BAND_COUNT)
        log10 band energies (same unit, floored at 1e-9).
    onset : ndarray (F,)
        Percussive spectral flux (arbitrary unit, >= 0).
    """

    frame_rate_hz: float
    energy: np.ndarray
    harmonic_share: np.ndarray
    notes_hz: np.ndarray
    notes_energy: np.ndarray
    notes_tonal: np.ndarray
    bands: np.ndarray
    onset: np.ndarray

    @property
    def frames(self) -> int:
        return int(self.energy.size)

    @property
    def level_db(self) -> np.ndarray:
        """Band energy per frame in dB re a full-scale sine."""
        return 10.0 * np.log10(np.maximum(self.energy, 1e-12))

    @property
    def sounding(self) -> np.ndarray:
        return self.level_db > SILENCE_DB

    def slice(self, first: int, last: int) -> "TrackFeatures":
        """The frames ``first`` to ``last - 1``."""
        s = slice(first, last)
        return TrackFeatures(self.frame_rate_hz, self.energy[s], self.harmonic_share[s],
                             self.notes_hz[s], self.notes_energy[s], self.notes_tonal[s],
                             self.bands[s], self.onset[s])


def _band_matrix(freqs_hz: np.ndarray, count: int) -> np.ndarray:
    edges = np.geomspace(freqs_hz[0], freqs_hz[-1] * 1.0001, count + 1)
    which = np.clip(np.searchsorted(edges, freqs_hz, side="right") - 1, 0, count - 1)
    m = np.zeros((freqs_hz.size, count), dtype=np.float32)
    m[np.arange(freqs_hz.size), which] = 1.0
    return m


def _padded_slice(x: np.ndarray, left: int, start: int, stop: int) -> np.ndarray:
    """Samples ``start`` to ``stop - 1`` of ``x`` with ``left`` zeros before it and zeros after it.

    The same as slicing the padded signal, without making a padded copy of the track.
    """
    out = np.zeros(stop - start, dtype=np.float32)
    a, b = max(start - left, 0), min(stop - left, x.size)
    if b > a:
        out[a + left - start:b + left - start] = x[a:b]
    return out


def _split(x: np.ndarray, rate_hz: int, hop: int, band_hz: float, frames: int):
    """Harmonic/percussive facts per frame, computed in blocks with margins.

    Returns the sustained share per frame, the percussive flux per frame, and
    a function giving the harmonic mask at (frequency, frame) pairs.
    """
    n_c = max(64, spectral.fft_size(rate_hz) // spectral.HPSS_WINDOW_DIVISOR)
    hop_c = hop * spectral.HPSS_HOP_FACTOR
    keep_c = spectral.band_slice(rate_hz, n_c, band_hz)
    frames_c = spectral.frame_count(x.size, hop_c)
    margin = max(spectral.HPSS_KERNEL) // 2 + 1
    share = np.ones(frames_c, dtype=np.float32)
    flux = np.zeros(frames_c, dtype=np.float32)
    mask = np.ones((keep_c.stop - keep_c.start, frames_c), dtype=np.float16)
    prev_mag = None
    full_scale = n_c ** 2 * 3.0 / 32.0
    for first in range(0, frames_c, spectral.CHUNK_FRAMES):
        last = min(frames_c, first + spectral.CHUNK_FRAMES)
        a, b = max(0, first - margin), min(frames_c, last + margin)
        seg = _padded_slice(x, n_c // 2, a * hop_c, (b - 1) * hop_c + n_c)
        power = spectral.stft_power(seg, n_c, hop_c, 0, b - a, keep_c)
        if np.any(power > 0):
            mask_h, mask_p = spectral.hpss_masks(np.sqrt(power))
        else:
            mask_h, mask_p = np.ones_like(power), np.zeros_like(power)
        inner = slice(first - a, first - a + (last - first))
        p_in, mh, mp = power[:, inner], mask_h[:, inner], mask_p[:, inner]
        total = p_in.sum(axis=0, dtype=np.float64)
        share[first:last] = np.where(total > 0, (mh * p_in).sum(axis=0) / np.where(total > 0, total, 1.0), 1.0)
        perc = np.sqrt(mp * p_in)
        before = perc[:, :1] if prev_mag is None else prev_mag
        flux[first:last] = np.maximum(0.0, np.diff(np.concatenate([before, perc], axis=1), axis=1)).sum(axis=0)
        prev_mag = perc[:, -1:]
        mask[:, first:last] = mh
    flux /= np.sqrt(full_scale)
    to_c = np.clip(np.rint(np.arange(frames) / spectral.HPSS_HOP_FACTOR).astype(int), 0, frames_c - 1)

    def harmonic_at(freq_hz: np.ndarray, frame: np.ndarray) -> np.ndarray:
        k = np.rint(np.nan_to_num(freq_hz) / (rate_hz / n_c)).astype(int) - keep_c.start
        k = np.clip(k, 0, mask.shape[0] - 1)
        return np.where(np.isfinite(freq_hz), mask[k, to_c[frame]].astype(np.float32), 0.0)

    return share[to_c], flux[to_c], harmonic_at


def track_features(samples: np.ndarray, rate_hz: int, hop: int, band_hz: float) -> TrackFeatures:
    """Analyse a mono signal frame by frame.

    Parameters
    ----------
    samples : ndarray
        Mono signal, digital full scale.
    rate_hz : int
        Its sample rate, Hz.
    hop : int
        Samples per frame (one flame frame).
    band_hz : float
        Upper edge of the tube's band, Hz.
    """
    x = np.asarray(samples, dtype=np.float32)
    win = multipitch.window_samples(rate_hz)
    n_fft = win * multipitch.PAD
    keep = spectral.band_slice(rate_hz, n_fft, band_hz)
    bin_hz = rate_hz / n_fft
    freqs = np.arange(keep.start, keep.stop) * bin_hz
    full_scale = win ** 2 * 3.0 / 32.0 * multipitch.PAD  # band energy of a unit sine (Hann, padded)
    peak_scale = (win / 4.0) ** 2                        # power of a unit sine's peak bin (Hann)
    frames = spectral.frame_count(x.size, hop)
    est = multipitch.estimator(rate_hz, n_fft, keep.start, keep.stop - keep.start)
    bands_m = _band_matrix(freqs, BAND_COUNT)
    n = multipitch.MAX_NOTES
    energy = np.zeros(frames)
    notes_hz = np.full((frames, n), np.nan, dtype=np.float32)
    notes_e = np.zeros((frames, n), dtype=np.float32)
    bands = np.zeros((frames, BAND_COUNT), dtype=np.float32)
    floor = np.float32(np.sqrt(peak_scale) * 10.0 ** (WHITEN_FLOOR_DB / 20.0))

    def chunk_power(first, last, every=1):
        seg = _padded_slice(x, win // 2, first * hop, (last - 1) * hop + win)
        fr = np.lib.stride_tricks.sliding_window_view(seg, win)[::hop][:last - first:every]
        spec = spectral.windowed_spectrum(fr, n_fft, keep)
        return (spec.real ** 2 + spec.imag ** 2).T.astype(np.float32)   # (bins, frames)

    template = None
    if OWN_TIMBRE:
        # the track's own partial amplitudes, from the notes of every LEARN_EVERY-th frame
        cands, ratios = [], []
        for first in range(0, frames, spectral.CHUNK_FRAMES):
            last = min(frames, first + spectral.CHUNK_FRAMES)
            white = est.whiten(np.sqrt(chunk_power(first, last, LEARN_EVERY)), floor)
            c, r = est.partial_ratios(white, est.estimate(white)[0])
            cands.append(c)
            ratios.append(r)
        template = est.learn_template(np.concatenate(cands), np.concatenate(ratios))
    for first in range(0, frames, spectral.CHUNK_FRAMES):
        last = min(frames, first + spectral.CHUNK_FRAMES)
        power = chunk_power(first, last)
        energy[first:last] = power.sum(axis=0, dtype=np.float64) / full_scale
        bands[first:last] = (power.T @ bands_m) / np.float32(full_scale)
        found, _ = est.estimate(est.whiten(np.sqrt(power), floor), template=template)
        f, e = multipitch.drop_partials(*est.refine(power, found))
        notes_hz[first:last] = f
        notes_e[first:last] = e / peak_scale
    # band energies over about 0.4 s (BAND_SMOOTH_FRAMES), as the segmentation reads them
    from scipy.ndimage import uniform_filter1d

    bands = np.log10(np.maximum(uniform_filter1d(bands, BAND_SMOOTH_FRAMES, axis=0, mode="nearest"), 1e-9))
    share, onset, harmonic_at = _split(x, rate_hz, hop, band_hz, frames)
    rows = np.broadcast_to(np.arange(frames)[:, None], notes_hz.shape)
    tonal = harmonic_at(notes_hz, rows)
    return TrackFeatures(frame_rate_hz=rate_hz / hop, energy=energy, harmonic_share=share,
                         notes_hz=notes_hz, notes_energy=notes_e, notes_tonal=tonal.astype(np.float32),
                         bands=bands, onset=onset)
