"""The plots of `showkit modes --plot`, `showkit scan --plot` and `showkit measure analyse --plot`.

Each must be a real PNG of the stated size (1000 x 600 px at the default
10 x 6 in and 100 dpi; the scan's grows by 300 px per track) that holds a
picture, not a blank page.
"""

from __future__ import annotations

import numpy as np

from showkit.cli.main import main
from showkit.export.common import png_size


def _ink(path) -> float:
    """Fraction of pixels that are not the white page (matplotlib's PNG reader, from memory)."""
    import matplotlib.image as mpimg

    img = mpimg.imread(str(path))[..., :3]
    return float(np.mean(np.any(img < 0.95, axis=2)))


def test_modes_plot(tmp_path, capsys):
    out = tmp_path / "modes.png"
    assert main(["modes", "--plot", str(out)]) == 0
    assert png_size(out) == (1000, 600)
    assert _ink(out) > 0.03
    assert "n" in capsys.readouterr().out  # the table is printed as before


def test_plot_to_missing_folder_is_one_line_exit_2(tmp_path, capsys):
    assert main(["modes", "--plot", str(tmp_path / "nowhere" / "m.png")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no such folder" in err[0]


def test_scan_plot(tmp_path, monkeypatch, capsys):
    import soundfile as sf

    monkeypatch.setenv("SHOWKIT_CACHE_DIR", str(tmp_path / "cache"))
    rate = 22050
    t = np.arange(int(6 * rate)) / rate
    # two held notes (common practice, no source): the map must show them as driven rows
    x = 0.3 * np.where(t < 3, np.sin(2 * np.pi * 186 * t), np.sin(2 * np.pi * 292 * t))
    sf.write(tmp_path / "two.wav", x, rate)
    out = tmp_path / "map.png"
    assert main(["scan", str(tmp_path / "two.wav"), "--plot", str(out), "--no-cache", "--jobs", "1"]) == 0
    assert png_size(out) == (1000, 600)
    assert _ink(out) > 0.03


def test_mode_map_adapter_gives_the_map_form(tmp_path, monkeypatch):
    import soundfile as sf

    from showkit.analysis.scan import track_frames
    from showkit.export.common import mode_map
    from showkit.physics.modes import find_modes
    from showkit.rigfile import load_rig

    monkeypatch.setenv("SHOWKIT_CACHE_DIR", str(tmp_path / "cache"))
    rig = load_rig()
    # a steady tone on the demo rig's own mode 4, as the model computes it (`showkit modes`)
    f4 = next(m.frequency_hz for m in find_modes(rig.model) if m.n == 4)
    rate = 22050
    t = np.arange(int(4 * rate)) / rate
    sf.write(tmp_path / "tone.wav", 0.3 * np.sin(2 * np.pi * f4 * t), rate)
    m = mode_map(rig, tmp_path / "tone.wav")
    data = m.to_json()
    assert set(data) == {"hop_s", "times_s", "modes", "strength", "hit", "notes_hz"}
    s = np.asarray(data["strength"])
    hit = np.asarray(data["hit"])
    assert s.shape == (len(data["modes"]), len(data["times_s"])) == hit.shape
    assert hit.dtype == bool
    assert len(data["notes_hz"]) == len(data["times_s"])
    # the scan's map is on an absolute 0-1 scale (not normalised to its strongest cell)
    assert np.all((0.0 <= s) & (s <= 1.0))
    # the adapter is the scan's map, with at most 10 of its rows kept, unchanged
    scan = track_frames(rig, tmp_path / "tone.wav")["map"]
    assert 0 < len(data["modes"]) <= 10
    rows = [scan["modes"].index(mode) for mode in data["modes"]]
    assert rows == sorted(rows)
    assert data["hop_s"] == scan["hop_s"] and data["times_s"] == scan["times_s"]
    np.testing.assert_array_equal(s, np.asarray(scan["strength"], dtype=float)[rows])
    np.testing.assert_array_equal(hit, np.asarray(scan["hit"], dtype=bool)[rows])
    assert data["notes_hz"] == [list(r) for r in scan["notes_hz"]]
    # the tone on mode 4 drives mode 4 most, and it is hit
    strongest = data["modes"][int(np.argmax(s.sum(axis=1)))]
    assert strongest["n"] == 4
    assert s.max() > 0 and hit[[mode["n"] for mode in data["modes"]].index(4)].any()
    w = m.window(1.0, 2.0)
    assert w.times_s.min() >= 1.0 - 1e-9 and w.times_s.max() <= 2.0 + 1e-9


def test_measure_plot(tmp_path, capsys, monkeypatch):
    import soundfile as sf
    from measure_support import FS, tube_recording

    from showkit.analysis import sweep
    from showkit.rigfile import load_rig

    deconvolved = []  # the sweep is deconvolved once for the analysis and its plot (was twice)
    real = sweep.deconvolve
    monkeypatch.setattr(sweep, "deconvolve", lambda *a, **k: deconvolved.append(1) or real(*a, **k))

    rec, x, _ = tube_recording(load_rig(), 1.01, 600.0, 3.0)
    sf.write(tmp_path / "rec.wav", rec, FS, subtype="FLOAT")
    sf.write(tmp_path / "sweep.wav", x, FS, subtype="FLOAT")
    out = tmp_path / "response.png"
    assert main(["measure", "analyse", str(tmp_path / "rec.wav"), "--sweep", str(tmp_path / "sweep.wav"),
                 "--plot", str(out)]) == 0
    assert png_size(out) == (1000, 600)
    assert _ink(out) > 0.03
    assert len(deconvolved) == 1
