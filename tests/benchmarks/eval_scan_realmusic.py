"""The scan measured on real music (run by hand: python tests/benchmarks/eval_scan_realmusic.py [FOLDER]).

Renders (or reuses, from FOLDER) the real-music set of ``tests/realmusic.py``
-- public-domain scores from music21's corpus played by fluidsynth with the
FluidR3 General MIDI soundfont, the MIDI notes at the soundfont's measured
tuning as ground truth -- scans every track on the set's invented rig and
prints issue 12's figures: frame-level mode-hit precision/recall/F1 (pooled
and per track), mir_eval multi-pitch metrics on the map's ``notes_hz``,
mir_eval.melody raw pitch accuracy of the dominant pitch, scores against the
share of time notes are held on readable modes (Spearman), off-mode/on-mode
score ratios, the drum kit's score, transposition recovery (+-25 cents) and
passage boundaries at the medley's joins (within 1.5 s).

It runs against whichever engine is importable: the map comes from
``showkit.analysis.scan.track_map(rig, path)`` (the ``scan --map`` JSON layout
of issue 12) when that exists, else from ``showkit scan TRACK --map FILE``, else
from the engine before issue 12 (see ``realmusic.engine_map``).  ``--json
FILE`` also writes all the figures.
"""

from __future__ import annotations

import argparse
import json
import os
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve()
sys.path.insert(0, str(HERE.parents[1]))          # tests/ (realmusic)
if not os.environ.get("PYTHONPATH"):
    sys.path.insert(0, str(HERE.parents[2]))      # the repository


def main() -> int:
    ap = argparse.ArgumentParser()
    ap.add_argument("folder", nargs="?", default=os.path.join(tempfile.gettempdir(), "showkit-realmusic"))
    ap.add_argument("--json", metavar="FILE")
    args = ap.parse_args()
    import numpy as np

    import realmusic as rm

    os.environ.setdefault("SHOWKIT_CACHE_DIR", tempfile.mkdtemp(prefix="showkit-eval-cache-"))
    t = time.perf_counter()
    corpus = rm.build(args.folder)
    print(f"corpus ready in {time.perf_counter() - t:.1f} s ({args.folder})")
    print(rm.describe(corpus))
    t = time.perf_counter()
    res = rm.evaluate(corpus, progress=lambda n: print(f"  scanning {n}", file=sys.stderr))
    print(f"scan + evaluation: {time.perf_counter() - t:.1f} s")
    print(rm.report(res))
    if args.json:
        Path(args.json).write_text(json.dumps(res, indent=1, default=lambda o: np.asarray(o).tolist()))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
