"""SIGKILL ``showkit lock`` at staggered moments while it saves a multi-megabyte sheet (issue 14).

The sheet has 300 cues (tones and pauses) with 8 kB notes each, about 2.4 MB.
``lock --cue`` locks one cue, so most of each run is reading, checking and
saving the big sheet: the kills land in the save.  After every kill the
sheet and ``show.toml.bak`` must each be a whole version (it parses, has
every cue with its whole notes, and is a version that was on disk before),
and the next run must clean up the temporary files a killed run left.
"""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

REPO = Path(__file__).resolve().parent.parent
CUES = 300
NOTE = ("Tell them where the nodes are, then let the flames answer. " * 200)[:8000]


def _big_sheet() -> str:
    lines = ['title = "Kill test"', 'rig = "demo"', "format = 1"]
    for k in range(CUES):
        source = ("pause = { duration = 1.0 }" if k % 2
                  else 'tone = { frequency = "100 Hz", duration = 1.0 }')
        # notes as TOML literal strings: read with a search, not character by character (a
        # 2.4 MB sheet of basic strings takes 0.75 s a read; the run reads it twice)
        lines += ["", "[[cue]]", f'id = "c{k}"', source, "gain = -60.0", f"notes = '{NOTE} {k}'"]
    return "\n".join(lines) + "\n"


def _whole(text: str) -> bool:
    from showkit.show.sheet import parse_sheet

    sheet = parse_sheet(text)
    return len(sheet.cues) == CUES and all(c.notes == f"{NOTE} {k}" for k, c in enumerate(sheet.cues))


def _start(sheet: Path, cue: str) -> subprocess.Popen:
    env = dict(os.environ, PYTHONPATH=str(REPO))
    return subprocess.Popen([sys.executable, "-m", "showkit", "lock", str(sheet), "--cue", cue],
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, env=env, cwd=sheet.parent)


@pytest.mark.slow
def test_sigkill_during_lock_leaves_whole_sheet_and_backup(tmp_path, monkeypatch):
    monkeypatch.setenv("SHOWKIT_CACHE_DIR", str(tmp_path / "cache"))
    sheet = tmp_path / "show.toml"
    sheet.write_text(_big_sheet(), encoding="utf-8")
    assert sheet.stat().st_size > 2_000_000
    versions = {sheet.read_text(encoding="utf-8")}

    t0 = time.monotonic()  # one whole run, to place the kills
    assert _start(sheet, "c0").wait(timeout=120) == 0
    whole_run_s = time.monotonic() - t0
    versions.add(sheet.read_text(encoding="utf-8"))

    # staggered: some kills at fractions of a run, most just after the save has begun
    # (its temporary file appeared), 0 to 8 ms into it
    rng = np.random.default_rng(14)
    timed = list(np.linspace(0.5, 1.0, 4) * whole_run_s + rng.uniform(-0.02, 0.02, 4))
    in_save = [0.0, 0.0005, 0.001, 0.002, 0.003, 0.004, 0.006, 0.008]
    outcomes = {"killed": 0, "finished": 0, "killed while saving": 0, "new version": 0}
    for k, (how, at) in enumerate([("timed", t) for t in timed] + [("in save", d) for d in in_save]):
        proc = _start(sheet, f"c{k % 4}")
        if how == "timed":
            time.sleep(max(0.0, float(at)))
        else:
            deadline = time.monotonic() + 120
            while proc.poll() is None and time.monotonic() < deadline:
                if any(e.name.startswith(".show.toml.") for e in os.scandir(tmp_path)):
                    break
                time.sleep(0.0002)  # look every 0.2 ms or so, without taking a core from the run watched
            if at:
                time.sleep(at)
        saving = any(e.name.startswith(".show.toml.") for e in os.scandir(tmp_path))
        if proc.poll() is None:
            proc.send_signal(signal.SIGKILL)
            outcomes["killed"] += 1
            outcomes["killed while saving"] += saving
        else:
            outcomes["finished"] += 1
        proc.wait(timeout=60)
        text = sheet.read_text(encoding="utf-8")
        backup = (tmp_path / "show.toml.bak").read_text(encoding="utf-8")
        assert _whole(text), f"kill {k} ({how}, {at:.4f} s) left a broken sheet"
        assert _whole(backup), f"kill {k} ({how}, {at:.4f} s) left a broken backup"
        assert backup in versions, f"kill {k}: the backup is not a version that was on disk"
        if text not in versions:
            outcomes["new version"] += 1
        versions.add(text)
    print(f"\nkill test: {len(timed) + len(in_save)} runs, a whole run {whole_run_s:.2f} s: {outcomes}")
    assert outcomes["killed"] >= 6 and outcomes["killed while saving"] >= 3

    # a clean run removes what the killed runs left behind
    assert _start(sheet, "c1").wait(timeout=120) == 0
    assert _whole(sheet.read_text(encoding="utf-8"))
    left = [p.name for p in tmp_path.iterdir() if p.name.startswith(".show.toml.")]
    assert left == [], f"temporary files left behind: {left}"
