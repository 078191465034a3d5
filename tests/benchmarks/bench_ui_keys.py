"""How fast the UI answers keys while a track is analysed in the background.

Run by hand:  python tests/benchmarks/bench_ui_keys.py

Opens the demo show with a demo track (its analysis starts in a worker thread),
and while that job runs, sends cursor keys to the cue list and times each
from the key event to the moment the cursor has moved (the key handled), and
the event loop's own delay over a 20 ms sleep between presses.  Prints the median and the worst time, and how
many presses landed while the analysis was still running.
"""

from __future__ import annotations

import asyncio
import os
import statistics
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


async def main() -> int:
    from ui_support import lock_demo, make_app, mark_cautions_read

    from showkit.demo_files import demo_audio_path

    with tempfile.TemporaryDirectory() as tmp:
        os.environ["SHOWKIT_DATA_DIR"] = str(Path(tmp) / "data")
        os.environ.setdefault("SHOWKIT_CACHE_DIR", str(Path(tmp) / "cache"))
        mark_cautions_read()
        track = demo_audio_path("three_rooms.flac")   # made now, not during the timing
        sheet = lock_demo(Path(tmp) / "show")
        app = make_app(sheet, track=track, view="show")
        times, during, lags = [], 0, []
        async with app.run_test(size=(100, 30)):
            from textual import events

            from showkit.ui.show import CueTable

            table = app.query_one(CueTable)
            while not app.busy("track"):
                await asyncio.sleep(0.01)
            await asyncio.sleep(0.3)
            key = "down"
            while app.busy("track") or len(times) < 20:
                busy = app.busy("track")
                row = table.cursor_row
                t = time.perf_counter()
                app.post_message(events.Key(key, None))
                while table.cursor_row == row and time.perf_counter() - t < 5:
                    await asyncio.sleep(0.001)
                times.append(time.perf_counter() - t)
                during += busy
                key = "up" if key == "down" else "down"
                # and the event loop's own delay over a 20 ms sleep
                t = time.perf_counter()
                await asyncio.sleep(0.02)
                lags.append(time.perf_counter() - t - 0.02)
                if os.environ.get("BENCH_VERBOSE"):
                    print(f"{times[-1] * 1000:.1f} ms, jobs {sorted(k.split('#')[0] for k in app._jobs)}")
            await app.workers.wait_for_complete()
    print(f"{len(times)} key presses, {during} while the track was being analysed: key handled after "
          f"median {statistics.median(times) * 1000:.1f} ms, worst {max(times) * 1000:.1f} ms; "
          f"event-loop delay worst {max(lags) * 1000:.1f} ms")
    return 0


if __name__ == "__main__":
    raise SystemExit(asyncio.run(main()))
