"""A short locked cue sheet for the export tests: an ok tone, an ok passage, an over and a stale cue."""

from __future__ import annotations

from pathlib import Path

import numpy as np

RATE = 48000


def passage_wav(folder: Path) -> Path:
    """3 s of two held notes on the demo rig's modes 3 and 4, as the model computes them (`showkit modes`)."""
    import soundfile as sf

    from showkit.physics.modes import find_modes
    from showkit.rigfile import load_rig

    f = {m.n: m.frequency_hz for m in find_modes(load_rig().model) if m.n in (3, 4)}
    t = np.arange(3 * RATE) / RATE
    x = 0.3 * np.where(t < 1.5, np.sin(2 * np.pi * f[3] * t), np.sin(2 * np.pi * f[4] * t))
    path = Path(folder) / "notes.wav"
    sf.write(path, x, RATE, subtype="FLOAT")
    return path


def over_gain_db(sheet, rig, cue, margin_db: float = 2.0) -> float:
    """A gain over the cue's locked ceiling far enough that the flame model draws air in.

    The locked ceiling is the lowest over the loss family and keeps a reserve; the
    flames are drawn from the best estimate. Air is drawn in where the best
    estimate's swing exceeds the static pressure, i.e. above the gain
    20 log10(static / swing at unit gain) dB; ``margin_db`` more than that (and
    never less than 3 dB over the lock), computed from the cue's own sound.
    """
    import math

    from showkit.analysis.pressure import signal_report
    from showkit.show.sources import cue_signal

    sig = cue_signal(sheet, rig, cue)
    best = signal_report(rig, sig.samples, sig.rate_hz, flames=False, robust=False)
    air_db = 20.0 * math.log10(rig.static_pa / best.swing_pa)
    return max(air_db + margin_db, cue.lock.ceiling_db + 3.0)


def short_sheet(folder: Path) -> Path:
    """The sheet, locked; then ``loud`` raised over its ceiling (until the best estimate draws
    air in, :func:`over_gain_db`) and ``changed`` edited (stale)."""

    from showkit.show.lock import lock_sheet, sheet_rig
    from showkit.show.sheet import ToneSource, load_sheet, save_sheet

    folder = Path(folder)
    passage_wav(folder)
    path = folder / "short.toml"
    path.write_text('''title = "Short test show"
rig = "demo"
format = 1

[[cue]]
id = "hum"
label = "Mode 4 hum"
tone = { mode = 4, duration = 1.5 }
gain = -36.0
fade_in = 0.3
fade_out = 0.3
notes = "wait for quiet"

[[cue]]
id = "notes"
label = "Two notes"
audio = "notes.wav"
start = 0.5
end = 2.5
gain = -30.0
fade_in = 0.2
fade_out = 0.2
then = "next"

[[cue]]
id = "loud"
label = "Too loud"
tone = { mode = 3, duration = 1.0 }
gain = -40.0
fade_in = 0.2
fade_out = 0.2

[[cue]]
id = "changed"
label = "Edited after the lock"
tone = { mode = 2, duration = 1.0 }
gain = -40.0
fade_in = 0.2
fade_out = 0.2
''', encoding="utf-8")
    sheet = load_sheet(path)
    rig = sheet_rig(sheet)
    lock_sheet(sheet, rig)
    sheet.replace_cue("loud", gain_db=over_gain_db(sheet, rig, sheet.cue("loud")))
    sheet.replace_cue("changed", source=ToneSource(1.2, mode=2))
    save_sheet(sheet)
    return path


def exported_short_sheet(tmp_path_factory, command: str, out_name: str, *options: str):
    """The short sheet made in a fresh folder and exported by ``showkit COMMAND SHEET -o OUT OPTIONS``.

    ``{folder}`` in an option stands for the folder.  Returns (sheet path, output path, folder);
    the cache goes into the folder unless one is set.
    """
    import os

    from showkit.cli.main import main

    folder = tmp_path_factory.mktemp(command)
    os.environ.setdefault("SHOWKIT_CACHE_DIR", str(folder / "cache"))
    sheet = short_sheet(folder)
    out = folder / out_name
    assert main([command, str(sheet), "-o", str(out), *(o.format(folder=folder) for o in options)]) == 0
    return sheet, out, folder


def count_rig_reads(monkeypatch) -> list:
    """Every read of a rig file from here on, counted (showkit.rigfile.load_rig, as the
    sheet's rig and --rig reach it)."""
    import showkit.rigfile
    import showkit.show.lock

    reads, real = [], showkit.rigfile.load_rig

    def counted(*a, **k):
        reads.append(a[:1])
        return real(*a, **k)

    monkeypatch.setattr(showkit.rigfile, "load_rig", counted)
    monkeypatch.setattr(showkit.show.lock, "load_rig", counted)
    return reads
