"""Speed and memory of `showkit ceiling` (issue 3).  Run by hand, not collected by pytest:

    python tests/benchmarks/bench_ceiling.py            # 4-minute track + hour-long file
    python tests/benchmarks/bench_ceiling.py --quick    # 4-minute track only

1. A 4-minute 44.1 kHz stereo FLAC (sustained tones on the demo rig's modes, noise and
   percussive clicks, synthesized here) in a temp dir: ceiling plus flame frames with a
   warm process (filters designed once first), against decoding and resampling alone
   (``read_blocks``).  Target: under 2 s.
2. A 1-hour 44.1 kHz mono FLAC, written in blocks: the same in a subprocess, whose peak
   resident memory (``resource.getrusage(RUSAGE_SELF).ru_maxrss``) is reported.  Target:
   under 500 MB.

Wall-clock and CPU (process) times are both printed: on a shared machine the CPU time is
the steadier figure.
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

RATE = 44100


def synth_block(t: np.ndarray, mode_hz: list[float], rng, channels: int) -> np.ndarray:
    """Tones on the modes (slow swells), noise and clicks for the times ``t`` (s)."""
    x = np.zeros_like(t)
    for k, f in enumerate(mode_hz):
        swell = 0.5 * (1.0 - np.cos(2 * np.pi * t / (17.0 + 5 * k)))
        x += 0.08 * swell * np.sin(2 * np.pi * f * t + k)
    x += 0.01 * rng.standard_normal(t.size)
    beat = (t % 0.5) < 0.004  # a click every half second
    x[beat] += 0.3 * rng.standard_normal(int(beat.sum()))
    if channels == 1:
        return x[:, None]
    return np.stack([x, 0.9 * x + 0.005 * rng.standard_normal(t.size)], axis=1)


def write_track(path: Path, seconds: float, channels: int, mode_hz: list[float]) -> None:
    import soundfile as sf

    rng = np.random.default_rng(3)
    block = 1 << 20
    total = int(seconds * RATE)
    with sf.SoundFile(str(path), "w", samplerate=RATE, channels=channels, format="FLAC",
                      subtype="PCM_16") as f:
        for start in range(0, total, block):
            t = np.arange(start, min(total, start + block)) / RATE
            f.write(np.clip(synth_block(t, mode_hz, rng, channels), -1.0, 1.0))


def timed(fn, repeats: int = 3):
    best_wall, best_cpu, value = np.inf, np.inf, None
    for _ in range(repeats):
        w, c = time.perf_counter(), time.process_time()
        value = fn()
        best_wall = min(best_wall, time.perf_counter() - w)
        best_cpu = min(best_cpu, time.process_time() - c)
    return best_wall, best_cpu, value


def decode_only(path: Path, rate_hz: int) -> int:
    from showkit.analysis.audio import read_blocks

    return sum(b.size for b in read_blocks(path, rate_hz))


def child(path: str) -> None:
    """Run in a subprocess: ceiling + flames of a long file, print time and peak memory."""
    import resource

    from showkit.analysis.pressure import hole_filters, passage_report
    from showkit.rigfile import load_rig

    rig = load_rig(None)
    hole_filters(rig)
    w, c = time.perf_counter(), time.process_time()
    report = passage_report(rig, path)
    out = {"wall_s": time.perf_counter() - w, "cpu_s": time.process_time() - c,
           "maxrss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0,
           "ceiling_db": report.ceiling_db, "frames": int(report.frames.height.shape[0])}
    print(json.dumps(out))


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--quick", action="store_true", help="skip the hour-long file")
    parser.add_argument("--child", help=argparse.SUPPRESS)
    args = parser.parse_args()
    if args.child:
        child(args.child)
        return

    from showkit.analysis.pressure import hole_filters, passage_report
    from showkit.physics.modes import find_modes
    from showkit.rigfile import load_rig

    rig = load_rig(None)
    modes = [m.frequency_hz for m in find_modes(rig.model) if m.n in (2, 3, 5, 8)]
    with tempfile.TemporaryDirectory() as tmp:
        track = Path(tmp) / "four_minutes.flac"
        write_track(track, 240.0, 2, modes)
        w, c, filters = timed(lambda: hole_filters(rig), 1)
        print(f"filters designed once: {w:.2f} s ({filters.taps} taps at {filters.rate_hz} Hz, "
              f"{filters.holes} holes)")
        passage_report(rig, track, 0.0, 5.0)  # warm
        w, c, report = timed(lambda: passage_report(rig, track))
        dw, dc, _ = timed(lambda: decode_only(track, filters.rate_hz))
        print(f"4-minute 44.1 kHz stereo FLAC: ceiling + flames {w:.2f} s wall, {c:.2f} s CPU "
              f"(target < 2 s); decode + resample alone {dw:.2f} s wall, {dc:.2f} s CPU; "
              f"ratio {w / dw:.1f} (wall), {c / dc:.1f} (CPU)")
        print(f"  ceiling {report.ceiling_db:+.2f} dB ({report.ceiling.limited_by}), "
              f"{report.frames.height.shape[0]} frames x {report.frames.height.shape[1]} holes, "
              f"contrast {report.contrast:.3f}")
        if args.quick:
            return
        hour = Path(tmp) / "one_hour.flac"
        t0 = time.perf_counter()
        write_track(hour, 3600.0, 1, modes)
        print(f"1-hour mono FLAC written in {time.perf_counter() - t0:.0f} s "
              f"({hour.stat().st_size / 1e6:.0f} MB)")
        res = subprocess.run([sys.executable, __file__, "--child", str(hour)], capture_output=True,
                             text=True, check=True)
        got = json.loads(res.stdout.strip().splitlines()[-1])
        dw, dc, _ = timed(lambda: decode_only(hour, filters.rate_hz), 1)
        print(f"1-hour file: ceiling + flames {got['wall_s']:.1f} s wall, {got['cpu_s']:.1f} s CPU, "
              f"peak memory {got['maxrss_mb']:.0f} MB (target < 500 MB); decode + resample alone "
              f"{dw:.1f} s wall, {dc:.1f} s CPU; ratio {got['wall_s'] / dw:.1f} (wall), "
              f"{got['cpu_s'] / dc:.1f} (CPU); ceiling {got['ceiling_db']:+.2f} dB, "
              f"{got['frames']} frames")


if __name__ == "__main__":
    main()
