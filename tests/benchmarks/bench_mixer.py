"""The audio callback's cost: CPU time per block as a fraction of the block's duration.

Run by hand (not collected): ``python tests/benchmarks/bench_mixer.py``.  Drives
:meth:`showkit.show.engine.Engine.render_into` (the whole callback path, with the
mixer behind it) with no device, in three situations: a cue playing, a fade with
a fader move, and cue boundaries every few blocks (then = "next").  Prints the
median time per block over the block's duration at 48 kHz: the callback must stay
far below 1 (it shares the device's period with the OS and the driver).
"""

from __future__ import annotations

import statistics
import time

import numpy as np

from showkit.show.engine import Engine
from showkit.show.playlist import RenderedCue

RATE = 48000


def _cues(n, seconds, then):
    rng = np.random.default_rng(1)
    return [RenderedCue(f"c{k}", "", rng.uniform(-0.5, 0.5, int(seconds * RATE)).astype(np.float32),
                        RATE, then=then) for k in range(n)]


def _median_block_s(engine, block, blocks=2000):
    out = np.zeros((block, 1), np.float32)
    times = []
    for _ in range(blocks):
        t0 = time.perf_counter()
        engine.render_into(out, block)
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def main():
    for block in (64, 512):
        period = block / RATE
        e = Engine(_cues(1, 60, "wait"))
        e.go()
        playing = _median_block_s(e, block)
        e = Engine(_cues(1, 60, "wait"), fade_s=30.0, fader_slew_s=20.0)
        e.go()
        e.render_into(np.zeros((block, 1), np.float32), block)
        e.set_fader_db(-20.0)
        e.fade_out()
        fading = _median_block_s(e, block)
        e = Engine(_cues(400, 3 * block / RATE, "next"))
        e.go()
        boundaries = _median_block_s(e, block, blocks=1000)
        print(f"block {block:4d} ({period * 1000:.2f} ms): time / period  playing {playing / period:.4f}"
              f"  fading+fader {fading / period:.4f}  cue boundaries {boundaries / period:.4f}")


if __name__ == "__main__":
    main()
