"""Pressure at every hole over time, for any drive signal.

The tube is linear: the pressure at hole ``i`` is the drive signal convolved
with that hole's impulse response ``g_i``, the inverse transform of

    G_i(f) = K D(f) H_i(f) W(f)

- ``H_i``: pressure per unit volume velocity (:class:`~showkit.physics.tube.TubeModel`),
- ``D``: the drive model (:func:`~showkit.physics.drive.driver_shape`),
- ``K``: the scale fixed by the calibration point (DEVELOPERS.md Methods §5),
- ``W``: a raised-cosine taper from the plane-wave limit ``f_c`` to ``1.2 f_c``;
  the plane-wave model says nothing above ``f_c`` (DEVELOPERS.md Methods §3).

The analysis rate is ``fs = 2.5 f_c`` rounded up to a multiple of 300 Hz,
so that a 30 frame/s flame frame is a whole number of samples.  The impulse
responses are as long as the slowest mode needs to ring down to the design
tolerance (checked on the transform, doubled until the tail is negligible).

Convolution is by FFT overlap-add in blocks (memory bounded for any length).
Each block gives the *analytic* pressure ``p + j H{p}`` (H: Hilbert
transform): its real part is the pressure, its magnitude an envelope that
bounds ``|p(t)|`` at every instant, including between samples, so a crest
that falls between samples is not missed (DEVELOPERS.md Methods §7).
"""

from __future__ import annotations

import math
import os
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass
from typing import Iterable, Iterator

import numpy as np

from showkit.physics.drive import DriveCalibration, driver_shape
from showkit.physics.flames import FRAME_RATE_HZ
from showkit.physics.tube import TubeModel

#: Taper of the response above the plane-wave limit: from f_c to this multiple of it.
TAPER_END = 1.2
#: Delay given to the impulse responses so that the taper's acausal part is kept, s.
PRE_RING_S = 0.02
#: Most threads :func:`simulate` shares the holes between.
MAX_WORKERS = 4


def analysis_rate_hz(plane_wave_limit_hz: float) -> int:
    """Analysis rate for a tube: ``2.5 f_c`` rounded up to a multiple of 300 Hz (Hz)."""
    return int(300 * math.ceil(2.5 * plane_wave_limit_hz / 300.0))


def _taper(freq_hz: np.ndarray, f_c: float) -> np.ndarray:
    x = np.clip((freq_hz - f_c) / ((TAPER_END - 1.0) * f_c), 0.0, 1.0)
    return 0.5 * (1.0 + np.cos(np.pi * x))


@dataclass(frozen=True)
class HoleFilters:
    """Impulse responses from digital signal to pressure at every hole.

    Attributes
    ----------
    rate_hz : int
        Analysis rate, Hz.
    impulse : ndarray, shape (holes, taps)
        ``g_i[n]``: Pa per unit digital sample.
    cap_impulse : ndarray, shape (taps,)
        The same for the rigid cap (where the calibration is read).
    scale : float
        ``K``: volume velocity per unit digital amplitude at the reference
        frequency, m^3/s.
    band_hz : float
        Upper edge of the response (``1.2 f_c``), Hz.
    drive_text : str
        Which calibration and drive model the levels rest on.
    delay : int
        Samples by which the responses are delayed (to keep the taper's
        acausal part); outputs are ``delay`` samples late.
    """

    rate_hz: int
    impulse: np.ndarray
    cap_impulse: np.ndarray
    scale: float
    band_hz: float
    drive_text: str
    delay: int = 0

    @property
    def taps(self) -> int:
        return self.impulse.shape[1]

    @property
    def holes(self) -> int:
        return self.impulse.shape[0]

    @property
    def frame_samples(self) -> int:
        return int(round(self.rate_hz / FRAME_RATE_HZ))

    def spectrum(self, m: int, analytic: bool) -> np.ndarray:
        """One-sided spectra of the impulse responses at FFT size ``m``, complex64 (holes, m/2 + 1).

        With ``analytic`` the positive frequencies are doubled (``p + j H{p}``).
        Kept on the instance: a warm process transforms the filters once.
        """
        cache = self.__dict__.setdefault("_spectra", {})
        key = (int(m), bool(analytic))
        if key not in cache:
            spec = np.fft.rfft(self.impulse, n=m, axis=1)
            if analytic:
                spec[:, 1:m // 2] *= 2.0  # analytic: double the positive frequencies, no negative ones
            cache[key] = spec.astype(np.complex64)
        return cache[key]


def drive_scale(model: TubeModel, drive: DriveCalibration) -> float:
    """``K`` (m^3/s per unit digital amplitude) from the calibration point.

    A sine of peak digital amplitude ``A = 10^(L/20)`` at ``f_ref`` gives the
    pressure amplitude ``P_ref`` at the cap: ``P_ref = K A |D(f_ref) H_cap(f_ref)|``.
    """
    f_ref = drive.reference_frequency_hz
    h_cap = model.response([f_ref]).cap_pressure[0]
    amplitude = 10.0 ** (drive.reference_level_dbfs / 20.0)
    per_unit = amplitude * abs(driver_shape([f_ref], drive)[0] * h_cap)
    if not (math.isfinite(per_unit) and per_unit > 0 and math.isfinite(drive.reference_pressure_pa)
            and drive.reference_pressure_pa > 0):
        # fails closed: a degenerate calibration never becomes a scale of 0 or inf
        raise ValueError(f"the calibration point gives no finite drive scale ({per_unit!r} per unit, "
                         f"{drive.reference_pressure_pa!r} Pa)")
    scale = float(drive.reference_pressure_pa / per_unit)
    if not (math.isfinite(scale) and scale > 0):
        raise ValueError(f"the drive scale is not finite and positive ({scale!r})")
    return scale


def transfer(model: TubeModel, drive: DriveCalibration, freq_hz,
             calibration_model: TubeModel | None = None) -> tuple[np.ndarray, np.ndarray]:
    """``G_i(f)`` at the holes and at the cap: Pa per unit digital amplitude (complex).

    Returns ``(holes, F)`` and ``(F,)`` arrays; zero at DC.  ``calibration_model``:
    the tube as it was when the calibration was read (the same tube in the gas at the
    rig file's temperature), from which the drive scale ``K`` is found; None: ``model``.
    The loudspeaker's volume velocity per unit amplitude does not change with the gas;
    the tube's response does (its modes move with the speed of sound), so a calibration
    read in one gas and applied as if read in another moves every ceiling -- by up to
    the height of a resonance where today's modes come near the calibration frequency.
    """
    f = np.asarray(freq_hz, dtype=float)
    positive = f > 0
    k = drive_scale(calibration_model or model, drive)
    holes = np.zeros((model.geometry.hole_count, f.size), dtype=complex)
    cap = np.zeros(f.size, dtype=complex)
    if np.any(positive):
        resp = model.response(f[positive])
        common = k * driver_shape(f[positive], drive) * _taper(f[positive], model.plane_wave_limit_hz)
        holes[:, positive] = resp.hole_pressure * common
        cap[positive] = resp.cap_pressure * common
    return holes, cap


def design_hole_filters(model: TubeModel, drive: DriveCalibration, rate_hz: int | None = None,
                        tolerance: float = 1e-4, max_seconds: float = 40.0,
                        calibration_model: TubeModel | None = None) -> HoleFilters:
    """Impulse responses at every hole, long enough to ring down to ``tolerance``.

    Parameters
    ----------
    model : TubeModel
    drive : DriveCalibration
    calibration_model : TubeModel, optional
        The tube in the gas the calibration was read in (:func:`transfer`); None: ``model``.
    rate_hz : int, optional
        Analysis rate (default :func:`analysis_rate_hz`).
    tolerance : float
        Relative amplitude (of the peak response) left in the part cut off.
    max_seconds : float
        Longest impulse response allowed, s.
    """
    fs = int(rate_hz or analysis_rate_hz(model.plane_wave_limit_hz))
    delay = int(round(PRE_RING_S * fs))
    n = 1 << 12
    floor = None
    while True:
        freq = np.fft.rfftfreq(n, 1.0 / fs)
        g_holes, g_cap = transfer(model, drive, freq, calibration_model)
        both = np.vstack([g_holes, g_cap[None, :]])
        # the taper W is zero-phase: its short acausal part wraps to the end of
        # the buffer; a small delay brings it to the front
        ir = np.roll(np.fft.irfft(both, n=n, axis=1), delay, axis=1)
        energy = np.cumsum((ir[:, ::-1] ** 2).sum(axis=0))[::-1]  # energy from sample k to the end
        total = energy[0] if energy[0] > 0 else 1.0
        tail = energy / total
        # the last eighth must be negligible, or the response wrapped around: double;
        # but a tail that no longer falls when the buffer doubles is a numerical
        # floor (e.g. of a measured drive response), not ringing: stop there
        last = float(tail[n - n // 8])
        if last < tolerance ** 2 or n / fs >= max_seconds or (floor is not None and last > 0.25 * floor):
            break
        floor = last
        n *= 2
    cut = int(np.searchsorted(-tail, -max(tolerance ** 2, 4.0 * float(tail[n - n // 8]))))
    taps = int(min(n, max(256, 256 * math.ceil(cut / 256))))
    ir = ir[:, :taps].copy()
    if not np.all(np.isfinite(ir)) or not np.any(ir[:-1]):
        # fails closed: NaN, infinite or all-zero responses would read as "no pressure"
        raise ValueError("the hole impulse responses are not finite or are all zero")
    fade = min(64, taps // 8)
    ir[:, taps - fade:] *= 0.5 * (1.0 + np.cos(np.pi * np.arange(1, fade + 1) / fade))
    return HoleFilters(rate_hz=fs, impulse=ir[:-1], cap_impulse=ir[-1], delay=delay,
                       scale=drive_scale(calibration_model or model, drive),
                       band_hz=TAPER_END * model.plane_wave_limit_hz,
                       drive_text=drive.describe())


def _fft_size(taps: int, frame: int) -> tuple[int, int]:
    m = 1 << int(math.ceil(math.log2(4 * taps)))
    hop = frame * ((m - taps + 1) // frame)
    return m, hop


@dataclass
class PressureFrames:
    """What a pass over a signal found, per flame frame.

    Attributes
    ----------
    frame_rate_hz : float
    envelope : ndarray, shape (frames, holes), or None
        Largest ``|p + j H{p}|`` within each frame at unit gain, Pa: a bound on
        the pressure swing at that hole in that frame (None from a flames-only
        pass, ``simulate(..., envelope=False)``).
    worst_pa : float
        Largest envelope anywhere at unit gain, Pa.
    worst_hole : int
        Hole (0-based from the driven end) where it occurred.
    worst_time_s : float
        When, from the start of the signal, s.
    height, air_in : ndarray, shape (frames, holes) or None
        Relative flame heights and air-drawn-in fractions at ``gain`` and
        ``static_pa`` (see :func:`showkit.physics.flames.frame_flames`).
    gain : float
        Linear gain the flames were computed at.
    """

    frame_rate_hz: float
    envelope: np.ndarray | None
    worst_pa: float
    worst_hole: int
    worst_time_s: float
    height: np.ndarray | None = None
    air_in: np.ndarray | None = None
    gain: float = 1.0


def _drive_blocks(blocks: Iterable[np.ndarray] | np.ndarray, hop: int, frame: int,
                  ring_out_samples: int) -> Iterator[np.ndarray]:
    """The drive re-cut into blocks of ``hop`` samples, float64.

    The last block (shorter) is followed by ``ring_out_samples`` zeros and
    padded with zeros to whole frames of ``frame`` samples; empty blocks are
    never yielded.
    """
    if isinstance(blocks, np.ndarray):
        if blocks.ndim != 1:
            raise ValueError("simulate() takes a mono drive signal (1-D blocks)")
        # one array: cut into views first, so that only a block at a time is made float64
        blocks = [blocks[k:k + hop] for k in range(0, blocks.size, hop)]
    pending = np.zeros(0)
    for b in blocks:
        b = np.asarray(b, dtype=float)
        if b.ndim != 1:
            raise ValueError("simulate() takes a mono drive signal (1-D blocks)")
        pending = np.concatenate([pending, b]) if pending.size else b
        while pending.size >= hop:
            yield pending[:hop]
            pending = pending[hop:]
    final = np.concatenate([pending, np.zeros(ring_out_samples)])
    final = np.concatenate([final, np.zeros((-final.size) % frame)])
    for k in range(0, final.size, hop):
        yield final[k:k + hop]


def _hole_groups(holes: int, workers: int | None) -> list[slice]:
    """The holes split between worker threads (default: the CPUs, at most :data:`MAX_WORKERS`)."""
    workers = max(1, min(holes, int(workers or min(MAX_WORKERS, os.cpu_count() or 1))))
    groups = [slice(k * holes // workers, (k + 1) * holes // workers) for k in range(workers)]
    return [g for g in groups if g.stop > g.start]


def _per_block(groups: list[slice], blocks: Iterator[np.ndarray], work) -> Iterator[tuple[np.ndarray, list]]:
    """``(block, [work(group, block) for each group])`` per block, the groups in threads.

    numpy's FFTs and ufuncs release the GIL, so the hole groups run in parallel.
    """
    pool = ThreadPoolExecutor(len(groups)) if len(groups) > 1 else None
    try:
        for x in blocks:
            if pool is None:
                yield x, [work(groups[0], x)]
            else:
                yield x, list(pool.map(lambda g: work(g, x), groups))
    finally:
        if pool is not None:
            pool.shutdown()


class _OverlapAdd:
    """Buffers of one FFT overlap-add pass over all holes (reused from block to block).

    ``analytic``: the output is ``p + j H{p}`` (complex64, full FFT size);
    otherwise the real pressure ``p`` (float32).
    """

    def __init__(self, filters: HoleFilters, m: int, hop: int, analytic: bool):
        holes, half = filters.holes, m // 2 + 1
        self.m, self.half, self.ntail = m, half, m - hop
        self.spec = filters.spectrum(m, analytic=analytic)
        self.analytic = analytic
        if analytic:
            self.full = np.zeros((holes, m), dtype=np.complex64)  # upper half stays zero
            self.y = np.empty((holes, m), dtype=np.complex64)
            self.env = np.empty((holes, hop), dtype=np.float32)
        else:
            self.full = np.zeros((holes, half), dtype=np.complex64)
            self.y = np.empty((holes, m), dtype=np.float32)
        self.tail = np.zeros((holes, self.ntail), dtype=self.y.dtype)

    def output(self, g: slice, xs: np.ndarray, size: int) -> np.ndarray:
        """The next ``size`` output samples of holes ``g``, given the block's spectrum ``xs``."""
        np.multiply(self.spec[g], xs[None, :], out=self.full[g, :self.half])
        if self.analytic:
            np.fft.ifft(self.full[g], axis=1, out=self.y[g])
        else:
            np.fft.irfft(self.full[g], n=self.m, axis=1, out=self.y[g])
        self.y[g, :self.ntail] += self.tail[g]
        np.copyto(self.tail[g], self.y[g, size:size + self.ntail])
        return self.y[g, :size]


def _frame_max(values: np.ndarray, frames: int, frame: int) -> np.ndarray:
    """Largest of each run of ``frame`` values along axis 1: (rows, frames)."""
    if frames <= 0:
        return np.zeros((values.shape[0], 0), dtype=values.dtype)
    # reduceat: the same maxima as reshape(rows, frames, frame).max(axis=2), about twice as fast
    return np.maximum.reduceat(values[:, :frames * frame], np.arange(0, frames * frame, frame), axis=1)


def _worst_in_block(envf: np.ndarray, env: np.ndarray, frame: int, start: int, worst: tuple) -> tuple:
    """``(pa, hole, sample)`` of the largest envelope so far, given a block's frame maxima.

    ``envf`` (holes, frames) are the frame maxima of ``env`` (holes, samples);
    ``start`` is the block's first output sample.
    """
    if not envf.size:
        return worst
    hole, fr = divmod(int(np.argmax(envf)), envf.shape[1])
    if not envf[hole, fr] > worst[0]:
        return worst
    t = fr * frame + int(np.argmax(env[hole, fr * frame:(fr + 1) * frame]))
    return float(envf[hole, fr]), int(hole), start + t


def _stack(parts: list, holes: int) -> np.ndarray:
    """Per-block (frames, holes) arrays as one float32 array (empty: no frames)."""
    return np.concatenate(parts).astype(np.float32, copy=False) if parts else np.zeros((0, holes), np.float32)


def simulate(filters: HoleFilters, blocks: Iterable[np.ndarray], static_pa: float | None = None,
             gain: float = 1.0, ring_out: bool = True, envelope: bool = True,
             workers: int | None = None) -> PressureFrames:
    """Run a signal through the tube, block by block (exact: what ceilings rest on).

    Parameters
    ----------
    filters : HoleFilters
    blocks : iterable of ndarray
        The drive signal at ``filters.rate_hz`` in digital full scale, in
        blocks of any length (a single array is one block).
    static_pa : float, optional
        Static overpressure, Pa; when given, flame heights are computed.
    gain : float
        Linear gain applied to the signal for the flames (the envelope is
        always reported at unit gain).
    ring_out : bool
        Go on after the signal until the tube has rung down.
    envelope : bool
        Compute the analytic envelope (and the worst moment).  With ``False``
        only the real pressure is computed (half the work), for a flames-only
        pass: ``envelope`` is then ``None`` and ``worst_pa`` is NaN.
    workers : int, optional
        Threads to share the holes between (default: the number of CPUs, at
        most :data:`MAX_WORKERS`); results do not depend on it.

    Notes
    -----
    FFT overlap-add (Oppenheim & Schafer, *Discrete-Time Signal Processing*,
    section 8.7) with an analytic-signal filter: the one-sided spectrum of
    each impulse response, doubled, gives ``p + j H{p}`` directly.  Spectra
    and outputs are single precision (complex64/float32); buffers are reused
    from block to block.  The envelope is the largest of every sample of
    ``|p + j H{p}|`` at the analysis rate (DEVELOPERS.md Methods §7).
    """
    from showkit.physics.flames import frame_flames

    if not envelope and static_pa is None:
        raise ValueError("nothing to compute: give static_pa or envelope=True")
    frame = filters.frame_samples
    m, hop = _fft_size(filters.taps, frame)
    ola = _OverlapAdd(filters, m, hop, analytic=envelope)

    def work(g: slice, x: np.ndarray):
        frames = x.size // frame
        out = ola.output(g, x_spectrum[0], x.size)
        envf = h = a = None
        if envelope:
            envf = _frame_max(np.abs(out, out=ola.env[g, :x.size]), frames, frame)  # (holes, frames)
        if static_pa is not None:
            # the real part is not needed again: a flames-only pass may overwrite it
            h, a = frame_flames((out.real if envelope else out)[:, :frames * frame], static_pa, frame,
                                gain=gain, overwrite=not envelope)
        return envf, h, a

    x_spectrum = [None]
    env_frames, h_frames, a_frames = [], [], []
    worst = (0.0, 0, 0)  # (Pa, hole, output sample)
    finite = True  # a NaN or infinite envelope anywhere makes worst_pa NaN (fails closed)
    done = 0  # output samples produced

    def with_spectrum(source):
        for x in source:
            x_spectrum[0] = np.fft.rfft(x, n=m).astype(np.complex64)
            yield x

    source = with_spectrum(_drive_blocks(blocks, hop, frame, filters.taps if ring_out else 0))
    for x, parts in _per_block(_hole_groups(filters.holes, workers), source, work):
        if envelope:
            envf = np.concatenate([p[0] for p in parts], axis=0)
            env_frames.append(envf.T)
            finite = finite and bool(np.all(np.isfinite(envf)))
            worst = _worst_in_block(envf, ola.env, frame, done, worst)
        if static_pa is not None:
            h_frames.append(np.concatenate([p[1] for p in parts], axis=1))
            a_frames.append(np.concatenate([p[2] for p in parts], axis=1))
        done += x.size
    result = PressureFrames(frame_rate_hz=filters.rate_hz / frame, envelope=None, worst_pa=math.nan,
                            worst_hole=0, worst_time_s=0.0, gain=gain)
    if envelope:
        result.envelope = _stack(env_frames, filters.holes)
        result.worst_pa = worst[0] if finite else math.nan
        result.worst_hole = worst[1]
        result.worst_time_s = max(0, worst[2] - filters.delay) / filters.rate_hz
    if static_pa is not None:
        result.height = _stack(h_frames, filters.holes)
        result.air_in = _stack(a_frames, filters.holes)
    return result


def envelope_range(filters: HoleFilters, signal: np.ndarray, ring_out: bool = True,
                   workers: int | None = None) -> np.ndarray:
    """Per flame frame, the least and the largest envelope over the holes, Pa at unit gain (frames, 2).

    **An approximation for the scan's display and score only, never for
    ceilings** (those use :func:`simulate`).  The same filters and frames as
    ``simulate(filters, signal, ring_out=ring_out).envelope`` reduced to
    ``[min over holes, max over holes]``, at half the cost: the analytic
    pressure holds no negative frequencies (its spectrum fills at most half
    the circle), so down-sampling it by two aliases nothing and its even
    samples are exactly the inverse FFT, half as long, of the first half of
    its spectrum with the Nyquist bin folded onto DC (Oppenheim & Schafer,
    *Discrete-Time Signal Processing*, ch. 4, down-sampling).  The frame
    maximum is then taken over every second sample only, so it can read low
    where the envelope peaks between them: on the real-music test set the
    passages' largest swing read up to 0.3 dB low (so the scan's ceiling up
    to 0.3 dB high), single frames up to a few dB (median 0.003 dB for the
    largest hole, 0.13 dB for the least).  Only the two reduced columns are
    kept: two numbers per frame whatever the number of holes.

    Parameters
    ----------
    filters : HoleFilters
        Needs an even ``frame_samples``.
    signal : ndarray
        Mono drive signal at ``filters.rate_hz``, digital full scale.
    ring_out : bool
        Go on after the signal until the tube has rung down (as :func:`simulate`).
    workers : int, optional
        Threads to share the holes between (as :func:`simulate`); results do
        not depend on it.
    """
    frame = filters.frame_samples
    if frame % 2:
        raise ValueError(f"envelope_range() needs an even frame ({frame} samples)")
    m, hop = _fft_size(filters.taps, frame)
    half, sub = m // 2, frame // 2
    spec = filters.spectrum(m, analytic=True)
    low, nyquist = 0.5 * spec[:, :half], 0.5 * spec[:, half]  # 0.5: the inverse FFT is half as long
    holes = filters.holes
    # one buffer: the product is transformed in place (the same values as into a second buffer,
    # one (holes, m/2) complex64 array less to hold and to stream through the cache)
    y = np.empty((holes, half), dtype=np.complex64)
    env = np.empty((holes, hop // 2), dtype=np.float32)
    ntail = (m - hop) // 2
    tail = np.zeros((holes, ntail), dtype=np.complex64)
    xs = [None]

    def work(g: slice, x: np.ndarray) -> np.ndarray:
        size = x.size // 2
        np.multiply(low[g], xs[0][None, :half], out=y[g])
        y[g, 0] += nyquist[g] * xs[0][half]
        np.fft.ifft(y[g], axis=1, out=y[g])
        y[g, :ntail] += tail[g]
        np.copyto(tail[g], y[g, size:size + ntail])
        e = _frame_max(np.abs(y[g, :size], out=env[g, :size]), size // sub, sub)  # (holes, frames)
        return np.stack([e.min(axis=0), e.max(axis=0)], axis=1)

    def with_spectrum(source):
        for x in source:
            xs[0] = np.fft.rfft(x, n=m).astype(np.complex64)
            yield x

    source = with_spectrum(_drive_blocks(np.asarray(signal), hop, frame, filters.taps if ring_out else 0))
    out = []
    for _, parts in _per_block(_hole_groups(holes, workers), source, work):
        out.append(np.stack([np.min([p[:, 0] for p in parts], axis=0),
                             np.max([p[:, 1] for p in parts], axis=0)], axis=1))
    return np.concatenate(out).astype(np.float32, copy=False) if out else np.zeros((0, 2), np.float32)


def pressure_signal(filters: HoleFilters, signal: np.ndarray) -> np.ndarray:
    """Analytic pressure ``p + j H{p}`` at every hole for a short signal (holes, N + taps - 1).

    Direct FFT convolution of the whole signal at once: for tests and short tones.
    """
    n = signal.size + filters.taps - 1
    m = 1 << int(math.ceil(math.log2(max(n, 2))))
    spec = np.fft.rfft(filters.impulse, n=m, axis=1)
    spec[:, 1:m // 2] *= 2.0
    full = np.zeros((filters.holes, m), dtype=complex)
    full[:, :m // 2 + 1] = spec * np.fft.rfft(signal, n=m)[None, :]
    return np.fft.ifft(full, axis=1)[:, :n]
