"""How the scan grows with the track's length, and a folder scan with 1 and 2 workers.

Run by hand: ``python tests/benchmarks/bench_scan_growth.py [--sizes 0.5 4 15 60] [--folder-only] [--cold] [--map]``
(``--cold``: the folder timed as fresh ``showkit scan FOLDER`` processes, imports included;
``--map``: each length's map as ``scan --map`` makes it, the top-line network included, in place
of the scan).

Inputs are musical: the real-music set of ``tests/realmusic.py`` (public-domain
scores from music21's corpus played by fluidsynth with the FluidR3 GM
soundfont), its tracks concatenated in turn until the wanted length, written
as 22.05-kHz mono FLAC.

Per length, one fresh Python process scans the file (``scan_paths``, no cache,
as ``showkit scan --jobs 1 --no-cache FILE`` does: one core) and reports its own wall time and peak resident
memory (``VmHWM`` of ``/proc/self/status``, which includes the interpreter
and libraries: the baseline "0 min" row is an import-only process of the same
kind).  Not ``ru_maxrss``: Linux keeps the high-water mark of the memory a
process had before ``exec``, so a child started from this (large) parent
process reported the parent's peak (638 MB for every code change at 60 min).  Issue 12's targets: linear in the length; peak under
500 MB for a 60-minute file; a folder scan with two workers >= 1.8x one on an
idle machine.  The load average is printed beside the timings because other
work on the machine slows the two-worker run most.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve()
REPO = HERE.parents[2]

CHILD = r"""
import json, os, resource, sys, time
t0 = time.perf_counter()
from showkit.analysis import scan as scan_mod
from showkit.rigfile import load_rig
rig = load_rig()
scan_mod.mode_table(rig)
from showkit.analysis.pressure import hole_filters
hole_filters(rig)
ready = time.perf_counter()
path = sys.argv[1]
mode = sys.argv[2]                 # a worker count, or "map"
if path != "-" and mode == "map":  # the map (scan --map): the analysis plus the top-line network
    scan_mod.track_map(rig, path)
elif path != "-":
    jobs = int(mode)
    out = scan_mod.scan_paths(rig, [path], jobs=jobs, use_cache=False)
    assert out[0]["error"] is None, out[0]["error"]
done = time.perf_counter()
def hwm_mb():
    # the peak of this process's own memory (VmHWM): ru_maxrss would report the parent's peak
    # when it is larger, since Linux carries the pre-exec memory's high-water mark over exec
    try:
        with open("/proc/self/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) / 1024.0
    except OSError:
        pass
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
print(json.dumps({"scan_s": done - ready, "import_s": ready - t0, "peak_mb": hwm_mb()}))
"""


def child(path: str, jobs: int | str = 1) -> dict:
    """One fresh process: ``jobs`` workers scan ``path`` ("-": none), or ``jobs="map"`` makes its map."""
    env = dict(os.environ, PYTHONPATH=os.environ.get("PYTHONPATH") or str(REPO))
    r = subprocess.run([sys.executable, "-c", CHILD, path, str(jobs)], capture_output=True, text=True,
                       env=env, check=False)
    if r.returncode:
        raise SystemExit(f"scan of {path} failed:\n{r.stderr[-2000:]}")
    return json.loads(r.stdout.strip().splitlines()[-1])


def musical(corpus, minutes: float, path: Path) -> Path:
    """The set's tracks (not the medley) played one after another until ``minutes`` are filled."""
    import numpy as np
    import realmusic as rm
    import soundfile as sf

    names = [n for n in corpus.tracks if n != "medley" and "_level" not in n]
    need = int(minutes * 60 * rm.RATE_HZ)
    parts, have, k = [], 0, 0
    while have < need:
        x, _ = sf.read(str(corpus[names[k % len(names)]].path), dtype="float32")
        parts.append(x[:need - have])
        have += parts[-1].size
        k += 1
    sf.write(str(path), np.concatenate(parts), rm.RATE_HZ, format="FLAC", subtype="PCM_16")
    return path


def main() -> int:
    sys.path.insert(0, str(HERE.parents[1]))
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", type=float, nargs="*", default=[0.5, 4.0, 15.0, 60.0])
    ap.add_argument("--corpus", default=os.path.join(tempfile.gettempdir(), "showkit-realmusic"))
    ap.add_argument("--folder-only", action="store_true")
    ap.add_argument("--map", action="store_true", help="time each length's map (scan --map), not the scan")
    ap.add_argument("--cold", action="store_true",
                    help="time the folder as a user runs it: a fresh 'showkit scan FOLDER --jobs N --no-cache' "
                         "process per run (imports included), not a warmed process calling scan_paths")
    args = ap.parse_args()
    import realmusic as rm

    tmp = Path(tempfile.mkdtemp(prefix="showkit-growth-"))
    os.environ["SHOWKIT_CACHE_DIR"] = str(tmp / "cache")
    corpus = rm.build(args.corpus)
    if not args.folder_only:
        base = child("-")
        print(f"process with showkit imported, rig ready: {base['peak_mb']:.0f} MB peak, "
              f"{base['import_s']:.1f} s")
        print(f"{'minutes':>8s} {'scan s':>8s} {'s/min':>7s} {'peak MB':>8s}  (one process per size, "
              f"scan_paths as 'showkit scan --jobs 1 --no-cache')   load avg")
        for minutes in args.sizes:
            path = musical(corpus, minutes, tmp / f"m{minutes:g}.flac")
            r = child(str(path), jobs="map" if args.map else 1)
            print(f"{minutes:8g} {r['scan_s']:8.1f} {r['scan_s'] / minutes:7.2f} {r['peak_mb']:8.0f}"
                  f"   {os.getloadavg()[0]:.1f}{'  (the map)' if args.map else ''}", flush=True)
            if minutes == max(args.sizes) and not args.map:
                # 'showkit scan FILE' with two cores: one file is scanned in this process, its
                # pressure pass on threads sharing the same buffers
                r = child(str(path), jobs=2)
                print(f"{minutes:8g} {r['scan_s']:8.1f} {r['scan_s'] / minutes:7.2f} {r['peak_mb']:8.0f}"
                      f"   {os.getloadavg()[0]:.1f}  (--jobs 2)", flush=True)
            path.unlink()
    if args.map:
        return 0
    # folder: the set's 13 short tracks four times over (52 files, 20-30 s each)
    folder = tmp / "folder"
    folder.mkdir()
    names = [n for n in corpus.tracks if n != "medley"]
    for rep in range(4):
        for n in names:
            os.symlink(corpus[n].path, folder / f"{rep}_{n}.wav")
    times = {}
    from showkit.analysis import scan as scan_mod
    from showkit.rigfile import load_rig

    rig = load_rig()
    if not args.cold:
        scan_mod.scan_track(rig, corpus["drums"].path)  # warm this process
    for jobs in (1, 2):
        load = os.getloadavg()[0]
        t = time.perf_counter()
        if args.cold:
            run = subprocess.run([sys.executable, "-m", "showkit", "scan", str(folder), "--jobs", str(jobs),
                                  "--no-cache", "--json"], capture_output=True, text=True,
                                 env=dict(os.environ, PYTHONPATH=str(REPO)))
            times[jobs] = time.perf_counter() - t
            assert run.returncode == 0, run.stderr
            out = json.loads(run.stdout)["tracks"]
        else:
            out = scan_mod.scan_paths(rig, [folder], jobs=jobs, use_cache=False)
            times[jobs] = time.perf_counter() - t
        assert len(out) == 4 * len(names) and all(o["error"] is None for o in out)
        print(f"folder of {len(out)} tracks, {jobs} worker(s): {times[jobs]:.1f} s "
              f"(load average before {load:.1f} on {os.cpu_count()} cores)", flush=True)
    print(f"two workers vs one: {times[1] / times[2]:.2f}x (target >= 1.8x on an idle machine)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
