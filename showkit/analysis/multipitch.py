"""Every sounding note of a frame: iterative harmonic-sum estimation and cancellation.

The method is A. Klapuri's, "Multiple fundamental frequency estimation by
summing harmonic amplitudes", ISMIR 2006:

1. **Spectral whitening.**  The magnitude spectrum is divided into bands whose
   centres lie evenly on a critical-band scale (``c_b = 229 (10^((b+1)/21.4) - 1)``
   Hz, triangular power responses); each band's standard deviation
   ``sigma_b`` gives a gain ``sigma_b^(nu - 1)`` (``nu = 0.33``), interpolated
   linearly between the band centres.  Timbre and level drop out: ratios of
   the whitened spectrum do not depend on the playing level.
2. **Salience** of a candidate fundamental ``f0``:
   ``s(f0) = sum_m g(f0, m) max_k |Y(k)|`` over the bins ``k`` near the
   ``m``-th partial, ``g(f0, m) = (f0 + alpha) / (m f0 + beta)``.  Here the
   candidates lie on a 10-cent grid and "near" is a maximum filter over
   +-2 bins of a twice zero-padded transform (+-4.7 Hz), so the sum is one
   sparse matrix product per frame block.
3. **Iterative estimation and cancellation.**  The best candidate is taken,
   its partials (``g``-weighted amplitudes times the window's main-lobe shape)
   are added to the spectrum of the detected sounds, and the residual
   ``max(0, Y - d Y_D)`` is searched again.  The polyphony is where
   ``sum_j s_j / j^gamma`` stops growing (Klapuri 2006, section 3.4).

Optionally (``features.OWN_TIMBRE``, off by default) the cancellation uses the
track's own timbre: partial amplitudes learnt from the notes of a first search
(:meth:`Estimator.learn_template`, harmonic templates with adaptive partial
amplitudes after Vincent, Bertin & Badeau, IEEE TASLP 18(3), 2010), so that a
found note cancels each partial only as far as its timbre explains it, and a
doubling hidden on its 2nd partial is left for the next search
(DEVELOPERS.md Methods §8b).

Each found fundamental is then placed to a few cents: the peaks of its first
three partials in the (unwhitened) power spectrum are interpolated by a
parabola on the log power (J. O. Smith, *Spectral Audio Signal Processing*,
"Quadratic interpolation of spectral peaks", CCRMA 2011) and averaged as
``f_m / m``, weighted by their power.

Written here rather than taken from a library: librosa offers the CQT front
end and pYIN (single line) but no multi-pitch estimator, and one CQT of a
track at the analysis rate costs more than this whole estimator (measured in
``tests/benchmarks/bench_scan.py``).
"""

from __future__ import annotations

import warnings
from functools import lru_cache

import numpy as np

#: Analysis window, s (512 samples at 4.8 kHz; tuned on rendered scores: 0.107 s found more
#: mode hits than 0.13, 0.16 or 0.21 s, whose smearing at note changes costs more than their resolution).
WINDOW_S = 0.107
#: The transform is this many times the window (zero padding: finer bins to interpolate on).
PAD = 2
#: Candidate fundamentals, Hz.
F0_MIN_HZ = 50.0
F0_MAX_HZ = 1400.0
#: Candidate grid step, cents.
GRID_CENTS = 10.0
#: Most partials summed per candidate.
MAX_HARMONICS = 16
#: Partial weights g(f0, m) = (f0 + ALPHA) / (m f0 + BETA), Hz (Klapuri 2006, 93 ms frames).
ALPHA_HZ = 27.0
BETA_HZ = 320.0
#: Cancellation depth d (Klapuri 2006).
CANCEL_D = 0.89
#: Polyphony estimation exponent gamma (Klapuri 2006 gives 0.27 for 46 ms and 0.39 for 93 ms frames;
#: tuned here on the rendered public-domain scores of tests/realmusic.py: 0.45 beat 0.4, 0.5, 0.55 and 0.7).
GAMMA = 0.45
#: Cancel the g-weighted partial amplitudes (Klapuri 2006) rather than the whole partials.
CANCEL_WEIGHTED = False
#: Most notes kept per frame.
MAX_NOTES = 6
#: Whitening exponent nu (Klapuri 2006).
WHITEN_NU = 0.33
#: Half-width of the maximum filter that finds a partial near its ideal bin, padded bins.
PARTIAL_REACH_BINS = 2
#: A later note is kept only when its salience reaches this fraction of the frame's first.
MIN_RELATIVE_SALIENCE = 0.1
#: A note this close (cents) to a partial (PARTIAL_RATIOS) of another note of the frame is dropped.
PARTIAL_CENTS = 25.0
PARTIAL_RATIOS = ()
#: ... and only when its partials carry less than this times the lower note's.
PARTIAL_ENERGY_RATIO = 1.0
#: A partial's interpolated peak counts for the refined frequency when within this of the candidate, cents
#: (wide: the maximum filter makes the salience of a low note flat over more than 100 cents).
REFINE_CENTS = 90.0
#: Candidates within this of a note already taken in the frame are not taken again, cents.
EXCLUDE_CENTS = 60.0
#: The track's own partial amplitudes (:func:`learn_template`): the quantile taken over its notes ...
TEMPLATE_QUANTILE = 0.75
#: ... over the notes within this of a candidate, semitones ...
TEMPLATE_REACH_SEMITONES = 6.0
#: ... from at least this many notes (else the nearest register's) ...
TEMPLATE_MIN_NOTES = 10
#: ... and a found note cancels each partial up to this times its template amplitude.
TEMPLATE_CAP = 1.0
#: Partials below this in the template do not set the note's amplitude.
TEMPLATE_MIN_PARTIAL = 0.05


def window_samples(rate_hz: int) -> int:
    """Analysis window length, samples (``WINDOW_S * rate_hz`` rounded to a multiple of 64)."""
    return max(64, int(round(WINDOW_S * rate_hz / 64.0)) * 64)


def candidate_hz() -> np.ndarray:
    """The candidate fundamentals, Hz (10-cent grid from :data:`F0_MIN_HZ`)."""
    count = int(np.floor(1200.0 * np.log2(F0_MAX_HZ / F0_MIN_HZ) / GRID_CENTS)) + 1
    return F0_MIN_HZ * 2.0 ** (np.arange(count) * GRID_CENTS / 1200.0)


def partial_weight(f0_hz, m):
    """Klapuri's (2006) partial weight ``g(f0, m) = (f0 + alpha) / (m f0 + beta)``."""
    return (f0_hz + ALPHA_HZ) / (m * f0_hz + BETA_HZ)


def hann_lobe(offset_bins) -> np.ndarray:
    """Magnitude of a Hann window's transform at ``offset_bins`` (unpadded bins), 1 at 0.

    ``|sinc(x) / (1 - x^2)|``, 0.5 at ``x = +-1`` and 0 from ``|x| >= 2``
    (F. J. Harris, Proc. IEEE 66(1), 1978, the Hann window's kernel).
    """
    x = np.abs(np.asarray(offset_bins, dtype=float))
    near_one = np.abs(x - 1.0) < 1e-9
    safe = np.where(near_one, 0.0, 1.0 - x ** 2)
    val = np.where(near_one, 0.5, np.sinc(x) / np.where(near_one, 1.0, safe))
    return np.where(x < 2.0, np.abs(val), 0.0)


class Estimator:
    """The fixed parts of the estimator for one rate, transform size and band (built once)."""

    def __init__(self, rate_hz: int, n_fft: int, first_bin: int, bins: int):
        from scipy import sparse

        self.rate_hz, self.n_fft, self.first_bin, self.bins = int(rate_hz), int(n_fft), int(first_bin), int(bins)
        self.bin_hz = rate_hz / n_fft
        top_hz = (first_bin + bins - 1 - PARTIAL_REACH_BINS - 1) * self.bin_hz
        f0 = candidate_hz()
        self.f0_hz = f0[f0 <= min(F0_MAX_HZ, top_hz)]
        c = self.f0_hz.size
        m = np.arange(1, MAX_HARMONICS + 1)
        pos = (m[None, :] * self.f0_hz[:, None]) / self.bin_hz - first_bin  # (C, M) fractional bin
        ok = (pos >= 0) & (pos <= bins - 2)
        self.harmonics = ok.sum(axis=1)  # partials inside the band, per candidate
        g = partial_weight(self.f0_hz[:, None], m[None, :])
        lo = np.floor(pos).astype(int)
        frac = pos - lo
        rows = np.repeat(np.arange(c)[:, None], MAX_HARMONICS, axis=1)
        data = np.concatenate([(g * (1 - frac))[ok], (g * frac)[ok]])
        cols = np.concatenate([lo[ok], lo[ok] + 1])
        rr = np.concatenate([rows[ok], rows[ok]])
        self.salience = sparse.csr_matrix((data.astype(np.float32), (rr, cols)), shape=(c, bins))
        self.g = g.astype(np.float32)
        self.pos = pos
        self.ok = ok
        # whitening bands (Klapuri 2006): centres c_b, triangular responses over b-1 .. b+1
        freqs = (first_bin + np.arange(bins)) * self.bin_hz
        b = np.arange(0, 40)
        centres = 229.0 * (10.0 ** ((b + 1) / 21.4) - 1.0)
        centres = centres[centres < freqs[-1] * 1.2]
        edges = np.concatenate([[0.0], centres, [centres[-1] * 1.3]])
        tri = np.zeros((bins, centres.size), dtype=np.float32)
        for j in range(centres.size):
            lo_e, mid, hi_e = edges[j], edges[j + 1], edges[j + 2]
            up = (freqs - lo_e) / max(mid - lo_e, 1e-9)
            down = (hi_e - freqs) / max(hi_e - mid, 1e-9)
            tri[:, j] = np.clip(np.minimum(up, down), 0.0, None)
        self.band_tri = tri / np.maximum(tri.sum(axis=0, keepdims=True), 1e-9)
        # linear interpolation of the band gains back onto the bins
        interp = np.zeros((bins, centres.size), dtype=np.float32)
        j = np.clip(np.searchsorted(centres, freqs) - 1, 0, centres.size - 2)
        w = np.clip((freqs - centres[j]) / (centres[j + 1] - centres[j]), 0.0, 1.0)
        interp[np.arange(bins), j] = 1.0 - w
        interp[np.arange(bins), j + 1] += w
        self.band_interp = interp
        self.lobe_offsets = np.arange(-2 * PAD, 2 * PAD + 1)
        # cancellation, per candidate: the bin nearest each partial, the bins of its main lobe (partials
        # outside the band and lobe bins off its edges go to a spare row, `bins`) and the lobe's shape
        self.near_bin = np.clip(np.rint(pos).astype(int), 0, bins - 1)                 # (C, M)
        lobe = self.near_bin[:, :, None] + self.lobe_offsets                            # (C, M, offsets)
        self.lobe_bin = np.where(ok[:, :, None] & (lobe >= 0) & (lobe < bins), lobe, bins)
        self.lobe_shape = hann_lobe((lobe - pos[:, :, None]) / PAD)
        # the cancellation adds all lobes with one fancy index, which counts a repeated bin once: the
        # partials of a candidate must lie at least a main lobe apart (F0_MIN_HZ against the bin width)
        gaps = np.diff(self.near_bin, axis=1)[ok[:, 1:] & ok[:, :-1]]
        if gaps.size and int(gaps.min()) < self.lobe_offsets.size:
            raise ValueError(f"partials {int(gaps.min())} bins apart overlap their {self.lobe_offsets.size}-bin "
                             f"lobes: raise F0_MIN_HZ or the transform size")

    def whiten(self, magnitude: np.ndarray, floor: float) -> np.ndarray:
        """Whitened magnitude (bins, frames); ``floor`` is an amplitude below which nothing counts."""
        power = magnitude ** 2
        sigma = np.sqrt(self.band_tri.T @ power)  # (bands, frames)
        gain = np.maximum(sigma, floor) ** (WHITEN_NU - 1.0)
        y = (self.band_interp @ gain) * magnitude
        return np.where(magnitude > floor, y, 0.0).astype(np.float32, copy=False)

    def estimate(self, whitened: np.ndarray, max_notes: int = MAX_NOTES, template: np.ndarray | None = None):
        """Iterative estimation on a block of whitened frames.

        With ``template`` (candidates x partials, from :meth:`learn_template`)
        a found note cancels each partial only up to ``TEMPLATE_CAP`` times
        its amplitude in the track's own timbre, the note's level being the
        median over its partials of observed / template amplitude; what its
        timbre does not explain (a doubling on its 2nd partial) stays for the
        next note (DEVELOPERS.md Methods §8b).

        Parameters
        ----------
        whitened : ndarray (bins, frames)
            From :meth:`whiten`.
        max_notes : int
        template : ndarray (candidates, MAX_HARMONICS) or None
            Relative partial amplitudes of the track (dimensionless); None: cancel every partial as observed.

        Returns
        -------
        index : ndarray (frames, max_notes) of int
            Candidate index of each note (-1: none), in the order found.
        salience : ndarray (frames, max_notes)
        """
        y = np.asarray(whitened, dtype=np.float32)
        bins, frames = y.shape
        found = np.full((frames, max_notes), -1, dtype=int)
        sal = np.zeros((frames, max_notes), dtype=np.float32)
        total = np.zeros(frames)
        first = np.zeros(frames)
        # candidates within EXCLUDE_CENTS of a note already taken: grid steps either side
        near_steps = np.arange(-int(np.ceil(EXCLUDE_CENTS / GRID_CENTS)) + 1, int(np.ceil(EXCLUDE_CENTS / GRID_CENTS)))
        top = self.f0_hz.size - 1
        reach = PARTIAL_REACH_BINS
        # Only the frames still taking notes are searched again: the arrays below hold just their columns,
        # compacted as frames drop out.
        act = np.arange(frames)
        resid = y                                   # residual max(0, Y - d Y_D) of the active frames
        ya = y                                      # their whitened spectrum (resid is never written in place)
        detected = np.zeros((bins + 1, frames), dtype=np.float32)  # their detected sounds Y_D (+ a spare row)
        for j in range(max_notes):
            if act.size == 0:
                break
            n = act.size
            # the strongest bin within +-reach (a maximum filter; resid >= 0, so the zeros outside the
            # band change nothing)
            rmax = resid.copy()
            for o in range(1, reach + 1):
                np.maximum(rmax[o:], resid[:-o], out=rmax[o:])
                np.maximum(rmax[:-o], resid[o:], out=rmax[:-o])
            s = self.salience @ rmax             # (candidates, frames)
            cols = np.arange(n)
            if j:
                # every active frame took a note at each earlier step: zero the grid steps around them
                taken = np.clip(found[act, :j][:, :, None] + near_steps, 0, top).reshape(n, -1)
                s[taken.T, cols[None, :]] = 0.0
            best = s.max(axis=0)
            c = (s == best).argmax(axis=0)   # the first largest, as argmax(s, axis=0), without its transpose
            del s
            if j == 0:
                keep = best > 0
                first[act] = best
            else:
                t = total[act]
                grown = (t + best) / (j + 1) ** GAMMA >= t / j ** GAMMA
                keep = grown & (best > 0) & (best >= MIN_RELATIVE_SALIENCE * first[act])
            kept = cols
            if not keep.all():
                kept = np.nonzero(keep)[0]
                act, c, best = act[kept], c[kept], best[kept]
                ya, detected = np.take(ya, kept, axis=1), np.take(detected, kept, axis=1)
            if act.size == 0:
                break
            found[act, j] = c
            sal[act, j] = best
            total[act] += best
            if j == max_notes - 1:
                break
            # cancel the partials of the frames that took a note, every lobe offset at once (partials lie
            # more than a main lobe apart, f0 >= 50 Hz: no bin but the spare row is written twice)
            n = act.size
            amp = rmax[self.near_bin[c], kept[:, None]] * (self.g[c] if CANCEL_WEIGHTED else 1.0)
            if template is not None:
                t = template[c]
                use = self.ok[c] & (t > TEMPLATE_MIN_PARTIAL)
                # the median over the usable partials (sorted with the others last; none: cancel as observed)
                r = np.sort(np.where(use, amp / np.where(use, t, 1.0), np.inf), axis=1)
                count = use.sum(axis=1)
                rows = np.arange(r.shape[0])
                lo, hi = r[rows, np.maximum(count - 1, 0) // 2], r[rows, np.minimum(count // 2, r.shape[1] - 1)]
                known = count > 0
                level = np.where(known, 0.5 * (lo + hi), 0.0)
                # no usable partial: cancel as observed (never inf * 0 = NaN into the residual)
                cap = (TEMPLATE_CAP * level[:, None] * t).astype(np.float32)
                amp = np.where(known[:, None], np.minimum(amp, cap), amp)
            flat = self.lobe_bin[c] * n + np.arange(n)[:, None, None]
            # one fancy-index add: each (bin, frame) once, since lobes never overlap (checked in __init__)
            # and ``detected`` is C-ordered (np.zeros, np.take), so the flat view writes through
            detected.reshape(-1)[flat] += (amp[:, :, None] * self.lobe_shape[c]).astype(np.float32)
            resid = np.multiply(detected[:bins], CANCEL_D)
            np.subtract(ya, resid, out=resid)
            np.maximum(0.0, resid, out=resid)
        return found, sal

    def partial_ratios(self, whitened: np.ndarray, index: np.ndarray):
        """Per found note: its candidate index (V,) and its partials' whitened peaks over its largest (V, M).

        The peaks are the largest whitened amplitude within ``PARTIAL_REACH_BINS``
        of each partial (dimensionless ratios, NaN outside the band); the input
        of :meth:`learn_template`.

        Parameters
        ----------
        whitened : ndarray (bins, frames)
            From :meth:`whiten`.
        index : ndarray (frames, notes) of int
            From :meth:`estimate`.
        """
        y = np.asarray(whitened, dtype=np.float32)
        fr, k = np.nonzero(index >= 0)
        c = index[fr, k]
        near = self.near_bin[c]
        peak = np.zeros(near.shape, dtype=np.float32)
        for o in range(-PARTIAL_REACH_BINS, PARTIAL_REACH_BINS + 1):
            peak = np.maximum(peak, y[np.clip(near + o, 0, y.shape[0] - 1), fr[:, None]])
        peak = np.where(self.ok[c], peak, np.nan)
        with np.errstate(invalid="ignore", divide="ignore"):
            top = np.nanmax(np.where(np.isfinite(peak), peak, -1.0), axis=1, keepdims=True)
            ratio = np.where(top > 0, peak / np.where(top > 0, top, 1.0), np.nan)
        return c, ratio

    def learn_template(self, cands: np.ndarray, ratios: np.ndarray):
        """The track's own partial amplitudes per candidate (candidates x partials), or None.

        For each semitone of the candidate range, the :data:`TEMPLATE_QUANTILE`
        quantile of each partial's ratio over the notes found within
        :data:`TEMPLATE_REACH_SEMITONES` (whitened peaks over the note's
        largest, :meth:`partial_ratios`), the nearest filled semitone where
        fewer than :data:`TEMPLATE_MIN_NOTES` notes lie: harmonic templates
        with the track's partial amplitudes, as in E. Vincent, N. Bertin and
        R. Badeau, "Adaptive harmonic spectral decomposition for multiple
        pitch estimation", IEEE TASLP 18(3), 2010, learnt here from the notes
        of a first pass (DEVELOPERS.md Methods §8b).

        Parameters
        ----------
        cands : ndarray (V,) of int
            Candidate index of each note (:meth:`partial_ratios`).
        ratios : ndarray (V, MAX_HARMONICS)
            Its partials' whitened peaks over its largest (dimensionless, NaN outside the band).
        """
        if cands.size < TEMPLATE_MIN_NOTES:
            return None
        semis = 12.0 * np.log2(self.f0_hz / F0_MIN_HZ)
        grid = np.arange(0, int(np.ceil(semis[-1])) + 1)
        near = np.abs(semis[cands][None, :] - grid[:, None]) < TEMPLATE_REACH_SEMITONES   # (grid, V)
        enough = near.sum(axis=1) >= TEMPLATE_MIN_NOTES
        if not enough.any():
            return None
        tab = np.zeros((grid.size, MAX_HARMONICS), dtype=np.float32)
        filled = np.nonzero(enough)[0]
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RuntimeWarning)    # an all-NaN partial (outside the band)
            for i in filled:                                   # one quantile per semitone of the range
                tab[i] = np.nan_to_num(np.nanquantile(ratios[near[i]], TEMPLATE_QUANTILE, axis=0))
        nearest = filled[np.argmin(np.abs(filled[None, :] - np.arange(grid.size)[:, None]), axis=1)]
        tab = tab[nearest]
        return tab[np.clip(np.rint(semis).astype(int), 0, grid.size - 1)]

    def refine(self, power: np.ndarray, index: np.ndarray):
        """Frequencies of the found notes to a few cents, and their partials' energy.

        Parameters
        ----------
        power : ndarray (bins, frames)
            Unwhitened power spectrum of the frames.
        index : ndarray (frames, notes) of int
            From :meth:`estimate`.

        Returns
        -------
        freq_hz : ndarray (frames, notes), NaN for none
        energy : ndarray (frames, notes)
            Sum over the partials in the band of the strongest bin near each
            (same unit as ``power``).
        """
        p = np.asarray(power, dtype=np.float32)
        bins, frames = p.shape
        valid = index >= 0
        cidx = np.where(valid, index, 0)
        # every figure below is computed for the notes found only (``_v``: one entry per found note)
        fr, cv = np.nonzero(valid)[0], index[valid]
        f0 = self.f0_hz[cv]                                             # (V,)
        # energy: strongest bin within the reach of each partial in the band
        pos = self.pos[cv]                                              # (V, M)
        ok = self.ok[cv]
        near = np.clip(np.rint(pos).astype(int), PARTIAL_REACH_BINS, bins - 1 - PARTIAL_REACH_BINS)
        peak = np.zeros(pos.shape, dtype=np.float32)
        for o in range(-PARTIAL_REACH_BINS, PARTIAL_REACH_BINS + 1):
            peak = np.maximum(peak, p[near + o, fr[:, None]])
        energy_v = np.where(ok, peak, 0.0).sum(axis=1)
        # frequency: interpolated peaks of partials 1-3
        num = np.zeros(cv.shape)
        den = np.zeros(cv.shape)
        with np.errstate(divide="ignore", invalid="ignore"):
            for h in range(3):
                ph = pos[:, h]
                k0 = np.clip(np.rint(ph).astype(int), PARTIAL_REACH_BINS + 1, bins - 2 - PARTIAL_REACH_BINS)
                win = np.stack([p[k0 + o, fr] for o in range(-PARTIAL_REACH_BINS, PARTIAL_REACH_BINS + 1)], axis=-1)
                k = k0 + np.argmax(win, axis=-1) - PARTIAL_REACH_BINS
                a = np.log(np.maximum(p[k - 1, fr], 1e-30))
                b = np.log(np.maximum(p[k, fr], 1e-30))
                c = np.log(np.maximum(p[k + 1, fr], 1e-30))
                den_ = a - 2.0 * b + c
                is_peak = (b >= a) & (b >= c) & (den_ < 0)
                delta = np.clip(np.where(is_peak, 0.5 * (a - c) / np.where(den_ < 0, den_, -1.0), 0.0), -0.5, 0.5)
                fh = (self.first_bin + k + delta) * self.bin_hz / (h + 1)
                close = np.abs(1200.0 * np.log2(fh / f0)) < REFINE_CENTS
                w = np.where(ok[:, h] & is_peak & close, p[k, fr], 0.0) / (h + 1)
                num += w * fh
                den += w
        freq = self.f0_hz[cidx]
        freq[valid] = np.where(den > 0, num / np.where(den > 0, den, 1.0), f0)
        energy = np.zeros(index.shape, dtype=energy_v.dtype)
        energy[valid] = energy_v
        # two candidates refined onto the same partials are one note: the later one is dropped
        with np.errstate(invalid="ignore", divide="ignore"):
            gap = np.abs(1200.0 * np.log2(freq[:, :, None] / freq[:, None, :]))
        earlier = np.tril(np.ones((index.shape[1], index.shape[1]), dtype=bool), -1)[None]
        twin = np.any((gap < 0.5 * EXCLUDE_CENTS) & earlier & valid[:, None, :], axis=2)
        valid = valid & ~twin
        return np.where(valid, freq, np.nan), np.where(valid, energy, 0.0)


def drop_partials(freq_hz: np.ndarray, energy: np.ndarray, ratios=None) -> tuple[np.ndarray, np.ndarray]:
    """Drop the notes that sit on a partial of a lower note of the same frame.

    A note within :data:`PARTIAL_CENTS` of ``h`` times another found note
    (``h`` in :data:`PARTIAL_RATIOS`) is taken for that note's partial: a rank
    of an organ, the strong second partial of a string.  True doublings at
    those intervals are lost with them.  Off by default (:data:`PARTIAL_RATIOS`
    empty): on the rendered scores of ``tests/realmusic.py`` dropping octaves
    and twelfths lost more true notes than false ones (mode-hit F1 0.60 without,
    0.55 with).
    """
    f = np.asarray(freq_hz, dtype=float)
    ratios = PARTIAL_RATIOS if ratios is None else ratios
    if f.ndim != 2 or f.shape[1] < 2 or not len(ratios):
        return freq_hz, energy
    with np.errstate(invalid="ignore", divide="ignore"):
        cents = 1200.0 * np.log2(f[:, :, None] / f[:, None, :])   # (F, i, j): note i over note j
    e = np.asarray(energy, dtype=float)
    weaker = e[:, :, None] < PARTIAL_ENERGY_RATIO * e[:, None, :]
    drop = np.zeros(f.shape, dtype=bool)
    for h in ratios:
        drop |= np.any((np.abs(cents - 1200.0 * np.log2(h)) < PARTIAL_CENTS) & weaker, axis=2)
    return (np.where(drop, np.nan, freq_hz).astype(np.asarray(freq_hz).dtype),
            np.where(drop, 0.0, energy).astype(np.asarray(energy).dtype))


@lru_cache(maxsize=4)
def estimator(rate_hz: int, n_fft: int, first_bin: int, bins: int) -> Estimator:
    """The :class:`Estimator` for this layout (built once per process)."""
    return Estimator(rate_hz, n_fft, first_bin, bins)
