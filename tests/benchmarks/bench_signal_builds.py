"""How many times each cue's signal is built, and how long, per check / render / run / lock pass.

Run from a tree's root with ``PYTHONPATH=.``::

    python tests/benchmarks/bench_signal_builds.py [SHEET ...]

(default: the demo show, ``cues/first-look.toml`` and ``cues/music-set.toml``).  A build is one
call of :func:`showkit.show.sources.cue_signal` (the counter wraps it wherever it was imported);
``run`` is the pre-show check and render of ``showkit run`` (:func:`render_for_playback`), at the
rig file's gas and at a gas 5 K warmer; ``lock`` is ``showkit lock`` on a copy of the sheet.  The
times are wall-clock seconds of the whole pass, best of ``--repeat`` runs.
"""

from __future__ import annotations

import argparse
import contextlib
import io
import shutil
import sys
import tempfile
import time
from collections import Counter
from pathlib import Path


def _install_counter() -> Counter:
    import showkit.show.sources as sources

    builds: Counter = Counter()
    original = sources.cue_signal

    def counted(sheet, rig, cue):
        builds[cue.id] += 1
        return original(sheet, rig, cue)

    for name, mod in list(sys.modules.items()):
        if name.startswith("showkit") and getattr(mod, "cue_signal", None) is original:
            mod.cue_signal = counted
    return builds


def _cli(args: list[str]) -> None:
    from showkit.cli.main import main

    err = io.StringIO()
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(err):
        status = main(args)
    if status:
        raise SystemExit(f"showkit {' '.join(args)}: exit {status}: {err.getvalue().strip()}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("sheets", nargs="*", default=["cues/first-look.toml", "cues/music-set.toml"])
    parser.add_argument("--repeat", type=int, default=2)
    args = parser.parse_args()
    # import everything that imports cue_signal before the counter wraps it
    import showkit.cli.check_cmd  # noqa: F401
    import showkit.cli.lock_cmd  # noqa: F401
    import showkit.cli.main  # noqa: F401
    import showkit.cli.render_cmd  # noqa: F401
    import showkit.show.lock  # noqa: F401
    import showkit.show.preshow  # noqa: F401
    import showkit.show.render as render
    from showkit.show.lock import sheet_rig
    from showkit.show.sheet import load_sheet

    builds = _install_counter()
    with tempfile.TemporaryDirectory() as tmp:
        for sheet_path in args.sheets:
            sheet = load_sheet(sheet_path)
            warm = sheet_rig(sheet).temperature_k + 5.0
            copy = Path(tmp) / "cues" / Path(sheet_path).name
            copy.parent.mkdir(exist_ok=True)
            passes = {
                "check": lambda: _cli(["check", sheet_path]),
                "render": lambda: _cli(["render", sheet_path, "-o", str(Path(tmp) / "show.wav")]),
                "run": lambda: render.render_for_playback(sheet_path),
                "run, gas +5 K": lambda: render.render_for_playback(sheet_path, temperature_k=warm),
                "lock": lambda: _cli(["lock", str(copy)]),
            }
            print(f"{sheet_path}: {len(sheet.cues)} cues")
            for name, fn in passes.items():
                best = float("inf")
                for _ in range(args.repeat):
                    if name == "lock":  # on a copy, next to a copy of the audio it names
                        shutil.copy(sheet_path, copy)
                        audio = Path(sheet_path).parent.parent / "demo_audio"
                        if audio.is_dir() and not (Path(tmp) / "demo_audio").exists():
                            shutil.copytree(audio, Path(tmp) / "demo_audio")
                    builds.clear()
                    t0 = time.perf_counter()
                    fn()
                    best = min(best, time.perf_counter() - t0)
                per_cue = sorted(set(builds[c.id] for c in sheet.cues))
                print(f"  {name:<14} {best:6.2f} s   builds per cue: "
                      f"{'/'.join(map(str, per_cue))} (total {sum(builds.values())})")


if __name__ == "__main__":
    main()
