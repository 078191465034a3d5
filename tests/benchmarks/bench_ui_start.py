"""Time from launching `showkit` to its first screen, in a real terminal (tmux), warm cache, as a ratio.

Run by hand:  python tests/benchmarks/bench_ui_start.py [RUNS]

The yardstick is the smallest Textual app (one line of text, ``SMALLEST_APP``),
started and timed the same way, the runs of the two interleaved so that a busy
machine slows both alike.  The figure is the ratio of the medians (showkit's
first screen / the smallest app's); the aim is at most 1.3.

Each run starts ``python -m showkit`` in a detached 100x30 tmux session with its
user folders in a temporary directory (the cautions already read, the demo
tracks already made: a warm cache), polls ``tmux capture-pane`` every 10 ms
until the demo show's cue list is drawn, records the time, and quits with
ctrl+q.  The first run warms the operating system's file cache and is not
counted.  Prints each time and the median, with the CPU time the process
had used by then (a figure that a busy machine inflates less than the wall time).
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import tempfile
import time
import uuid
from pathlib import Path

REPO = Path(__file__).resolve().parents[2]


def cpu_s(pid: int) -> float:
    """User + system CPU time of a process so far, s (Linux /proc)."""
    import os

    fields = Path(f"/proc/{pid}/stat").read_text().rsplit(")", 1)[1].split()
    return (int(fields[11]) + int(fields[12])) / os.sysconf("SC_CLK_TCK")


#: The smallest Textual app: one line of text with the two words the poll waits for.
SMALLEST_APP = ("from textual.app import App\n"
                "from textual.widgets import Static\n"
                "class Smallest(App):\n"
                "    def compose(self):\n"
                "        yield Static('welcome steps')\n"
                "Smallest().run()\n")


def one_run(folder: Path, smallest: bool = False) -> tuple[float, float]:
    name = f"bench-{uuid.uuid4().hex[:6]}"
    env = (f"HOME={folder / 'home'} SHOWKIT_DATA_DIR={folder / 'data'} SHOWKIT_CACHE_DIR={folder / 'cache'} "
           f"TERM=xterm-256color PYTHONPATH={REPO}")
    if smallest:
        script = folder / "smallest.py"
        script.write_text(SMALLEST_APP)
        command = f"env {env} {sys.executable} {script}"
    else:
        command = f"env {env} {sys.executable} -m showkit"
    for attempt in range(10):  # a tmux server that is just exiting refuses new sessions
        start = time.perf_counter()
        if subprocess.run(["tmux", "new-session", "-d", "-s", name, "-x", "100", "-y", "30",
                           command]).returncode == 0:
            break
        time.sleep(0.3)
    try:
        while True:
            screen = subprocess.run(["tmux", "capture-pane", "-p", "-t", name],
                                    capture_output=True, text=True).stdout
            if "welcome" in screen and "steps" in screen:
                wall = time.perf_counter() - start
                pid = int(subprocess.run(["tmux", "list-panes", "-t", name, "-F", "#{pane_pid}"],
                                         capture_output=True, text=True).stdout.split()[0])
                return wall, cpu_s(pid)
            if time.perf_counter() - start > 30:
                raise RuntimeError("no first screen within 30 s:\n" + screen)
            time.sleep(0.01)
    finally:
        subprocess.run(["tmux", "send-keys", "-t", name, "C-q"])
        time.sleep(0.5)
        subprocess.run(["tmux", "kill-session", "-t", name], capture_output=True)


def main(argv: list[str]) -> int:
    runs = int(argv[0]) if argv else 5
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        (folder / "data").mkdir()
        (folder / "data" / "cautions-read").write_text("read\n")
        times, base = [], []
        for k in range(runs + 1):  # interleaved; the first pair warms the file cache
            pair = one_run(folder), one_run(folder, smallest=True)
            if k:
                times.append(pair[0])
                base.append(pair[1])
    for (wall, cpu), (bwall, bcpu) in zip(times, base):
        print(f"first screen after {wall * 1000:.0f} ms (the process had used {cpu * 1000:.0f} ms of CPU); "
              f"smallest Textual app {bwall * 1000:.0f} ms ({bcpu * 1000:.0f} ms CPU)")
    wall, cpu = (statistics.median(t[0] for t in times), statistics.median(t[1] for t in times))
    bwall, bcpu = (statistics.median(t[0] for t in base), statistics.median(t[1] for t in base))
    print(f"showkit: median {wall * 1000:.0f} ms wall, {cpu * 1000:.0f} ms CPU; smallest Textual app: "
          f"{bwall * 1000:.0f} ms wall, {bcpu * 1000:.0f} ms CPU; over {len(times)} runs")
    print(f"ratio {wall / bwall:.2f}x wall, {cpu / bcpu:.2f}x CPU (aim: at most 1.3x)")
    # the fastest run of each is the least disturbed by other work on a shared machine
    print(f"ratio of the fastest runs {min(t[0] for t in times) / min(t[0] for t in base):.2f}x wall, "
          f"{min(t[1] for t in times) / min(t[1] for t in base):.2f}x CPU")
    return 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
