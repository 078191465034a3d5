"""Time to lock the demo show's 5 cues (issue 13).  Run by hand, not collected by pytest:

    python tests/benchmarks/bench_lock.py

Locks a copy of the bundled demo show (5 cues: a breathing-mode tone, a pause, a mode
tone, a glide and a music passage) on the demo rig, cold (impulse responses designed
from scratch, as a fresh ``showkit lock`` does) and warm (designed responses kept in
the process), best of three each.  Compare the figures of two versions by running the
script from each checkout (``PYTHONPATH=<checkout> python <checkout>/tests/benchmarks/...``);
issue 13 reports the ratio robust (several loss models) / before (one model).
Wall-clock and CPU (process) times are both printed: on a shared machine the CPU time
is the steadier figure.
"""

from __future__ import annotations

import os
import shutil
import tempfile
import time
from pathlib import Path


def main() -> None:
    from showkit.analysis import pressure
    from showkit.demo_files import bundled_demo_show
    from showkit.show.lock import lock_sheet
    from showkit.show.sheet import load_sheet

    tmp = Path(tempfile.mkdtemp(prefix="showkit-bench-lock-"))
    os.environ.setdefault("SHOWKIT_CACHE_DIR", str(tmp / "cache"))
    target = tmp / "show.toml"
    shutil.copyfile(bundled_demo_show(), target)
    results = {}
    for label, clear in (("cold", True), ("warm", False)):
        best_w = best_c = float("inf")
        for _ in range(3):
            if clear:
                pressure._designed_filters.cache_clear()
                pressure._family_filters.cache_clear()
            sheet = load_sheet(target)
            w, c = time.perf_counter(), time.process_time()
            lock_sheet(sheet)
            best_w = min(best_w, time.perf_counter() - w)
            best_c = min(best_c, time.process_time() - c)
        results[label] = (best_w, best_c)
        print(f"lock demo show ({len(sheet.cues)} cues), {label}: {best_w:.2f} s wall, {best_c:.2f} s CPU")
    print("ceilings: " + ", ".join(f"{c.id} {c.lock.ceiling_db:+.2f}" for c in sheet.cues if c.lock))
    print(f"load average while measuring: {os.getloadavg()[0]:.1f} on {os.cpu_count()} cores")
    shutil.rmtree(tmp, ignore_errors=True)


if __name__ == "__main__":
    main()
