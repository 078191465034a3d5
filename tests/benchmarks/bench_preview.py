"""Speed of `showkit preview` on the demo show (issue 15).  Run by hand, not collected by pytest:

    python tests/benchmarks/bench_preview.py                 # 1280x720, the default size
    python tests/benchmarks/bench_preview.py --size 960x540

The bundled demo show is copied to a temp folder and locked there (not timed), then
the whole preview -- rendering and verifying every cue, the flame frames, drawing every
frame with numpy, encoding H.264 + AAC with imageio-ffmpeg's ffmpeg -- runs in a fresh
process, timed from outside, as a user would run it.  Target: no longer than the show
itself on 2 cores, i.e. a ratio (wall time / show length) of at most 1.0.  The split of
the time between building the timeline and drawing + encoding is printed too, and the CPU
time of the preview process and its ffmpeg (the steadier figure on a shared machine).
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("--size", default="1280x720")
    args = ap.parse_args()
    env = dict(os.environ, PYTHONPATH=str(ROOT))
    with tempfile.TemporaryDirectory() as folder:
        env.setdefault("SHOWKIT_CACHE_DIR", str(Path(folder) / "cache"))
        sys.path.insert(0, str(ROOT))
        os.environ.update(env)
        from showkit.demo_files import bundled_demo_show
        from showkit.show.lock import lock_sheet
        from showkit.show.sheet import load_sheet, save_sheet

        sheet_path = Path(folder) / "demo.toml"
        shutil.copyfile(bundled_demo_show(), sheet_path)
        sheet = load_sheet(sheet_path)
        lock_sheet(sheet)  # also makes the demo tracks once
        save_sheet(sheet)
        out = Path(folder) / "demo.mp4"
        import resource

        k0 = resource.getrusage(resource.RUSAGE_CHILDREN)
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "showkit", "preview", str(sheet_path), "-o", str(out),
                        "--size", args.size], check=True, env=env, stderr=subprocess.DEVNULL)
        wall = time.perf_counter() - t0
        k1 = resource.getrusage(resource.RUSAGE_CHILDREN)  # the preview process and its ffmpeg
        cpu = (k1.ru_utime + k1.ru_stime) - (k0.ru_utime + k0.ru_stime)
        # the split: the timeline alone, in this process
        from showkit.export.preview import sheet_timeline

        t1 = time.perf_counter()
        tl = sheet_timeline(sheet_path)
        build = time.perf_counter() - t1
        show_s = tl.duration_s
        print(f"demo show {show_s:.1f} s at {args.size}, {os.cpu_count()} cores: preview written in {wall:.1f} s "
              f"(ratio {wall / show_s:.2f}; target <= 1.0); timeline (render, verify, flames) {build:.1f} s, "
              f"the rest (start-up, drawing, encoding) {wall - build:.1f} s; file {out.stat().st_size / 1e6:.1f} MB")
        print(f"CPU time (python + ffmpeg) {cpu:.1f} s = {cpu / show_s:.2f} x the show; on 2 otherwise idle "
              f"cores the wall time is at least {cpu / 2:.1f} s (ratio {cpu / 2 / show_s:.2f}); load now "
              f"{os.getloadavg()[0]:.1f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
