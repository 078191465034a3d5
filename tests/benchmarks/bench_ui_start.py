"""Time from launching `showkit` to its first screen, in a real terminal (tmux), warm cache.

Run by hand:  python tests/benchmarks/bench_ui_start.py [RUNS]

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


def one_run(folder: Path) -> tuple[float, float]:
    name = f"bench-{uuid.uuid4().hex[:6]}"
    env = (f"HOME={folder / 'home'} SHOWKIT_DATA_DIR={folder / 'data'} SHOWKIT_CACHE_DIR={folder / 'cache'} "
           f"TERM=xterm-256color PYTHONPATH={REPO}")
    for attempt in range(10):  # a tmux server that is just exiting refuses new sessions
        start = time.perf_counter()
        if subprocess.run(["tmux", "new-session", "-d", "-s", name, "-x", "100", "-y", "30",
                           f"env {env} {sys.executable} -m showkit"]).returncode == 0:
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
        times = [one_run(folder) for _ in range(runs + 1)][1:]
    for wall, cpu in times:
        print(f"first screen after {wall * 1000:.0f} ms (the process had used {cpu * 1000:.0f} ms of CPU)")
    print(f"median {statistics.median(t[0] for t in times) * 1000:.0f} ms wall, "
          f"{statistics.median(t[1] for t in times) * 1000:.0f} ms CPU, over {len(times)} runs")
    return 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
