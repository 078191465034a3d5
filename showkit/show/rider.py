"""A pressure-aware gain rider: lift the quiet, sustained parts of a cue.

At its locked gain a passage is held down everywhere by its loudest moment.
The rider lifts the rest (up to :data:`MAX_LIFT_DB`) and stays at the locked
gain only around the peaks that set the ceiling:

1. the tube's unit-gain pressure envelope per flame frame (max over holes);
2. the lift allowed per frame, ``S / E``, where ``E`` is the envelope's maximum
   from a little before the frame to one ring time after it (a lift now still
   rings in the tube that long: the ring time is where the impulse responses
   have decayed by 60 dB) and ``S`` the cue's own largest swing at its gain
   (never more than the safe line's ``(1 - m) dP0``): a cue set below its
   ceiling keeps its headroom, the rider lifting the quiet parts to the level
   of the cue's own peaks, not to the safe line (a presenter's -40 dB cue under a
   -29.2 dB ceiling was ridden to the line, margin 0); and the lift that keeps
   the peak at or below full scale; never below 1 (the cue's gain is safe);
3. smoothed without ever rising above the allowed lift: a running minimum
   followed by a running mean of the same width (so a slow, click-free curve);
4. applied, then **verified** by simulating the ridden samples; where a hole
   would still dip below the line the lift is lowered there and the check
   repeated; if that does not converge the cue plays at its locked gain.
"""

from __future__ import annotations

import numpy as np

from showkit.rigfile import Rig

#: Largest lift above the locked gain, dB.
MAX_LIFT_DB = 12.0
#: Width of the smoothing (running min, then running mean), s.
SMOOTH_S = 0.4
#: Look-behind before each frame, s (the look-ahead is the tube's ring time).
GUARD_S = 0.15
#: Longest look-ahead, s.
MAX_RING_S = 3.0
#: Rounds of verify-and-lower before giving up.
MAX_ROUNDS = 6


def _running(values: np.ndarray, width: int, how: str, behind: int | None = None) -> np.ndarray:
    """Running max/min/mean over ``width`` frames, ``behind`` of them before each frame
    (default: centred); edges padded with the end values."""
    if width <= 1:
        return values.copy()
    back = width // 2 if behind is None else behind
    padded = np.pad(values, (back, width - back - 1), mode="edge")
    windows = np.lib.stride_tricks.sliding_window_view(padded, width)
    return {"max": windows.max, "min": windows.min, "mean": windows.mean}[how](axis=1)


def ring_time_s(filters) -> float:
    """Time for the tube's impulse responses to decay by 60 dB in energy, s."""
    energy = (filters.impulse.astype(float) ** 2).sum(axis=0)
    tail = np.cumsum(energy[::-1])[::-1]
    k = int(np.searchsorted(-tail, -1e-6 * tail[0]))
    return min(MAX_RING_S, k / filters.rate_hz)


def lift_curve(rig: Rig, samples: np.ndarray, rate_hz: int, max_lift_db: float = MAX_LIFT_DB) -> np.ndarray:
    """The rider's gain (>= 1) for every sample of ``samples`` (already at the locked gain)."""
    from showkit.analysis.pressure import hole_filters
    from showkit.physics.response import simulate

    from showkit.analysis.pressure import family_filters

    filters = hole_filters(rig)
    drive = samples
    if rate_hz != filters.rate_hz:
        import soxr

        drive = soxr.resample(samples, rate_hz, filters.rate_hz, quality="HQ")
    frames = simulate(filters, drive, ring_out=False)
    fps = frames.frame_rate_hz
    env = frames.envelope.max(axis=1).astype(float)
    # the lift must hold for every member of the loss family, as the lock does
    for _, member in family_filters(rig)[1:]:
        other = simulate(member, drive, ring_out=False).envelope.max(axis=1).astype(float)
        n = min(env.size, other.size)
        env[:n] = np.maximum(env[:n], other[:n])
    n_frames = env.size
    behind = int(round(GUARD_S * fps))
    ahead = int(round(max(ring_time_s(f) for _, f in family_filters(rig)) * fps))
    guard = behind + ahead + 1
    env_window = np.maximum(_running(env, guard, "max", behind), 1e-12)
    allowed = min((1.0 - rig.reserve) * rig.static_pa, float(env.max()) if env.size else 0.0) / env_window
    # full scale: the sample peak in each frame's window
    per_frame = max(1, int(round(rate_hz / fps)))
    usable = min(samples.size, n_frames * per_frame)
    peaks = np.zeros(n_frames)
    if usable:
        k = usable // per_frame
        peaks[:k] = np.abs(samples[:k * per_frame]).reshape(k, per_frame).max(axis=1)
    peak_window = np.maximum(_running(peaks, guard, "max", behind), 1e-12)
    allowed = np.minimum(allowed, 1.0 / peak_window)
    lift = np.clip(allowed, 1.0, 10.0 ** (max_lift_db / 20.0))
    width = max(1, int(round(SMOOTH_S * fps)))
    smooth = _running(_running(lift, width, "min"), width, "mean")
    centres = (np.arange(n_frames) + 0.5) / fps
    t = np.arange(samples.size) / rate_hz
    return np.interp(t, centres, smooth, left=smooth[0] if n_frames else 1.0,
                     right=smooth[-1] if n_frames else 1.0)


def ride(rig: Rig, samples: np.ndarray, rate_hz: int, max_lift_db: float = MAX_LIFT_DB) -> np.ndarray:
    """Ride a cue's samples (at its locked gain): lifted where safe, verified.

    Returns new samples; if the rider cannot make a verified curve, the input unchanged.
    """
    from showkit.analysis.pressure import signal_report

    x = np.asarray(samples, dtype=float)
    if not x.any():
        return x

    lift = lift_curve(rig, x, rate_hz, max_lift_db)
    from showkit.analysis.pressure import family_filters

    ring = max(ring_time_s(f) for _, f in family_filters(rig))
    # the swing the ridden cue may reach: its own at its gain (its headroom kept), never the
    # safe line's more
    own = signal_report(rig, x, rate_hz, flames=False).swing_pa
    allowed_swing = min((1.0 - rig.reserve) * rig.static_pa, own)
    for _ in range(MAX_ROUNDS):
        y = x * lift
        peak = np.max(np.abs(y))
        report = signal_report(rig, y, rate_hz, flames=False)
        # the same slack for float32 rounding as the render's verification
        if report.swing_pa <= allowed_swing + 1e-5 * rig.static_pa and peak <= 1.0:
            return y
        # lower the lift by the excess around the worst moment, with the guard width
        over = report.swing_pa > allowed_swing + 1e-5 * rig.static_pa
        excess = max(report.swing_pa / max(allowed_swing, 1e-12), peak)
        t0 = report.worst_time_s if over else float(np.argmax(np.abs(y)) / rate_hz)
        t = np.arange(x.size) / rate_hz
        near = (t >= t0 - ring - SMOOTH_S) & (t <= t0 + GUARD_S + SMOOTH_S)
        lift = np.where(near, np.maximum(1.0, lift / (excess * 1.001)), lift)
        width = max(1, int(round(SMOOTH_S * rate_hz)))
        if width > 1 and x.size > width:
            # keep the lowered region click-free: a short raised-cosine smoothing of the curve,
            # taken as a minimum with the curve itself so that it never rises
            from scipy.signal import fftconvolve

            kernel = np.hanning(width)
            kernel /= kernel.sum()
            padded = np.pad(lift, width, mode="edge")
            lift = np.minimum(lift, fftconvolve(padded, kernel, mode="same")[width:-width])
            lift = np.maximum(lift, 1.0)
    return x
