"""Per-frame facts of a track, the input of segmentation and scoring.

One pass over the samples (at the hole filters' rate, one frame per flame
frame) gives, per frame: the energy in the tube's band, how much of it is
sustained (harmonic) rather than percussive, the strongest spectral peaks
(frequency, energy, sustained share), log energies in a few bands and a
percussive onset strength.  Methods: :mod:`showkit.analysis.spectral` and
:mod:`showkit.analysis.pitches`.  The spectrogram is made and reduced in
chunks, so memory stays bounded for long tracks.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from showkit.analysis import pitches, spectral

#: Log-spaced bands for the segmentation features.
BAND_COUNT = 16
#: The pitch spectrum is computed every this many frames (15 per second) and held between.
PITCH_HOP_FACTOR = 2
#: A frame whose band energy is below this (dB re a full-scale sine) is silent.
SILENCE_DB = -60.0


@dataclass
class TrackFeatures:
    """What the analysis keeps of a track, frame by frame (``F`` frames).

    Attributes
    ----------
    frame_rate_hz : float
    energy : ndarray (F,)
        Energy in the band, relative to a full-scale sine's (1.0 = 0 dB).
    harmonic_share : ndarray (F,)
        Fraction of the energy that is sustained (0 to 1).
    peak_hz, peak_energy, peak_harmonic : ndarray (F, K)
        Strongest peaks: frequency (Hz, NaN for none), main-lobe energy
        (same unit as ``energy``) and sustained share (0 to 1).
    bands : ndarray (F, BAND_COUNT)
        log10 band energies (same unit, floored at 1e-9).
    onset : ndarray (F,)
        Percussive spectral flux (arbitrary unit, >= 0).
    """

    frame_rate_hz: float
    energy: np.ndarray
    harmonic_share: np.ndarray
    peak_hz: np.ndarray
    peak_energy: np.ndarray
    peak_harmonic: np.ndarray
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
                             self.peak_hz[s], self.peak_energy[s], self.peak_harmonic[s],
                             self.bands[s], self.onset[s])


def _band_matrix(freqs_hz: np.ndarray, count: int) -> np.ndarray:
    edges = np.geomspace(freqs_hz[0], freqs_hz[-1] * 1.0001, count + 1)
    which = np.clip(np.searchsorted(edges, freqs_hz, side="right") - 1, 0, count - 1)
    m = np.zeros((freqs_hz.size, count), dtype=np.float32)
    m[np.arange(freqs_hz.size), which] = 1.0
    return m


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
    n_fft = spectral.fft_size(rate_hz)
    keep = spectral.band_slice(rate_hz, n_fft, band_hz)
    bin_hz = rate_hz / n_fft
    freqs = np.arange(keep.start, keep.stop) * bin_hz
    full_scale = n_fft ** 2 * 3.0 / 32.0  # positive-bin energy of a unit sine, Hann window
    frames = spectral.frame_count(x.size, hop)
    # the pitch spectrum is taken every PITCH_HOP_FACTOR frames and held in between
    step = PITCH_HOP_FACTOR
    hop_p = hop * step
    frames_p = spectral.frame_count(x.size, hop_p)
    padded = spectral.centre_pad(x, n_fft)
    bands_m = _band_matrix(freqs, BAND_COUNT)
    energy = np.zeros(frames_p)
    peak_hz = np.full((frames_p, pitches.PEAKS_PER_FRAME), np.nan)
    peak_e = np.zeros((frames_p, pitches.PEAKS_PER_FRAME))
    bands = np.zeros((frames_p, BAND_COUNT), dtype=np.float32)
    for first in range(0, frames_p, spectral.CHUNK_FRAMES):
        last = min(frames_p, first + spectral.CHUNK_FRAMES)
        power = spectral.stft_power(padded, n_fft, hop_p, first, last, keep) / np.float32(full_scale)
        energy[first:last] = power.sum(axis=0, dtype=np.float64)
        f, e = pitches.spectral_peaks(power, freqs[0], bin_hz)
        peak_hz[first:last], peak_e[first:last] = f, e
        bands[first:last] = np.log10(np.maximum(power.T @ bands_m, 1e-9))
    to_p = np.clip(np.rint(np.arange(frames) / step).astype(int), 0, frames_p - 1)
    energy, peak_hz, peak_e, bands = energy[to_p], peak_hz[to_p], peak_e[to_p], bands[to_p]

    # the sustained/percussive split on a shorter window, every second frame
    n_c = max(64, n_fft // spectral.HPSS_WINDOW_DIVISOR)
    hop_c = hop * spectral.HPSS_HOP_FACTOR
    keep_c = spectral.band_slice(rate_hz, n_c, band_hz)
    frames_c = spectral.frame_count(x.size, hop_c)
    power_c = spectral.stft_power(spectral.centre_pad(x, n_c), n_c, hop_c, 0, frames_c, keep_c)
    if np.any(power_c > 0):
        mask_h, mask_p = spectral.hpss_masks(np.sqrt(power_c))
    else:
        mask_h, mask_p = np.ones_like(power_c), np.zeros_like(power_c)
    total_c = power_c.sum(axis=0, dtype=np.float64)
    share_c = np.where(total_c > 0, (mask_h * power_c).sum(axis=0) / np.where(total_c > 0, total_c, 1.0), 1.0)
    perc_mag = np.sqrt(mask_p * power_c)
    flux_c = np.concatenate([[0.0], np.maximum(0.0, np.diff(perc_mag, axis=1)).sum(axis=0)])
    flux_c = flux_c / np.sqrt(full_scale / spectral.HPSS_WINDOW_DIVISOR ** 2)
    to_c = np.clip(np.rint(np.arange(frames) / spectral.HPSS_HOP_FACTOR).astype(int), 0, frames_c - 1)
    cbin = np.rint(np.nan_to_num(peak_hz) / (rate_hz / n_c)).astype(int) - keep_c.start
    cbin = np.clip(cbin, 0, mask_h.shape[0] - 1)
    peak_harm = np.where(np.isfinite(peak_hz), mask_h[cbin, to_c[:, None]], 0.0)
    return TrackFeatures(frame_rate_hz=rate_hz / hop, energy=energy, harmonic_share=share_c[to_c],
                         peak_hz=peak_hz, peak_energy=peak_e, peak_harmonic=peak_harm,
                         bands=bands, onset=flux_c[to_c])
