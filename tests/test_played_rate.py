"""Issue 11 item 7: a cue is verified at the rate it is played (render -o, run) and the lock agrees.

The source of the passage is seeded noise at 32 kHz: resampled to the show rate
(48 kHz), its pressure at the holes came out a little higher than at its own rate
(0.0007 dB over, before this was fixed), enough that a sheet which locked and
checked `ok` was refused by `render -o` and played over its ceiling by `run`.
"""

from __future__ import annotations

import numpy as np
import pytest
import soundfile as sf

from showkit.analysis.pressure import signal_report
from showkit.cli.main import main
from showkit.rigfile import load_rig
from showkit.show.lock import check_sheet
from showkit.show.render import render_for_playback
from showkit.show.sheet import load_sheet

SHEET = '''title = "played rate"
rig = "demo"
format = 1

[[cue]]
id = "c1"
tone = { mode = 3, duration = 2 }
gain = -40

[[cue]]
id = "c2"
audio = "noise.wav"
gain = 20
'''


@pytest.fixture(scope="module")
def locked(tmp_path_factory):
    folder = tmp_path_factory.mktemp("played_rate")
    rng = np.random.default_rng(0)
    sf.write(folder / "noise.wav", (0.2 * rng.standard_normal(2 * 32000)).astype(np.float32), 32000,
             subtype="FLOAT")
    sheet = folder / "show.toml"
    sheet.write_text(SHEET)
    assert main(["lock", str(sheet)]) == 0
    return sheet


def test_lock_check_render_and_run_agree_at_the_show_rate(locked, capsys):
    sheet = load_sheet(locked)
    rig = load_rig()
    assert [c.status for c in check_sheet(sheet, rig)] == ["ok", "ok"]
    # the gain was clamped at the lock to the ceiling, which holds at 48 kHz as well
    assert main(["render", str(locked), "-o", str(locked.parent / "show.wav")]) == 0
    show, rate = sf.read(locked.parent / "show.wav", dtype="float64")
    assert rate == 48000
    tone_len = 2 * 48000
    c2 = show[tone_len:]
    # the samples as written, at the rate written, through the pressure model: at or
    # below the ceiling (a ceiling >= 0 dB for the rendered samples; 1e-4 dB for float32)
    assert signal_report(rig, c2, rate, flames=False).ceiling_db >= -1e-4
    # run: the engine plays at 48 kHz (the tone's rate), the passage resampled
    cues, _ = render_for_playback(locked)
    from showkit.show.engine import Engine

    engine = Engine(cues)
    assert engine.rate_hz == 48000
    played = engine.cues[1]
    assert played.playable
    assert signal_report(rig, played.samples.astype(float), 48000, flames=False).ceiling_db >= -1e-4


def test_a_cue_resampled_for_a_device_is_checked_at_that_rate(locked):
    """At a device rate nobody locked for (here 44.1 kHz), the engine's resampling is
    verified; where the resampled cue would pass its ceiling it is brought down and says so."""
    from showkit.show.playlist import resample_cue

    rig = load_rig()
    cues, _ = render_for_playback(locked)
    for cue in cues:
        out = resample_cue(cue, 44100)
        assert out.playable
        assert signal_report(rig, out.samples.astype(float), 44100, flames=False).ceiling_db >= -1e-4
        assert out.gain_db <= cue.gain_db


def test_a_resampled_cue_over_its_ceiling_is_brought_down_and_says_so():
    """The check itself, with a verifier that reports 0.5 dB too loud at the new rate."""
    from showkit.show.playlist import RenderedCue, resample_cue

    seen = []

    def too_loud_once(samples, rate):
        seen.append(float(np.max(np.abs(samples))))
        return -0.5 if len(seen) == 1 else 0.0

    t = np.arange(4800) / 48000
    cue = RenderedCue("a", "A", 0.5 * np.sin(2 * np.pi * 100 * t), 48000, gain_db=-10.0, ceiling_db=-10.0,
                      verify_at=too_loud_once)
    out = resample_cue(cue, 44100)
    assert out.playable and out.gain_db == pytest.approx(-10.5)
    assert "0.50 dB lower" in out.message
    assert seen[1] == pytest.approx(seen[0] * 10 ** (-0.5 / 20), rel=1e-6)


def test_a_file_below_the_models_rate_is_read_up_to_its_nyquist_frequency():
    """A file at a rate below the model's is upsampled for the ceiling; a player at the file's own rate
    plays its whole band, so the top of that band must reach the tube model too.  soxr's transition
    band hid it: a 1917-Hz tone in a 4-kHz file read 5.8 dB above the same tone at 48 kHz on a rig
    with a 50-mm bore (plane-wave limit 2.9 kHz, above the file's 2 kHz).  Closed form: a sine at
    0.95 of the Nyquist frequency comes out as the same sine at the new rate."""
    from showkit.analysis.pressure import hole_filters, to_model_rate
    from showkit.rigfile import demo_rig_path, parse_rig

    text = demo_rig_path().read_text().replace('bore = "80 mm"', 'bore = "50 mm"')
    rig = parse_rig(text.replace('reference_frequency = "1439.3 Hz"', 'reference_frequency = "1557.6 Hz"'),
                    "bore 50 mm")
    model_rate = hole_filters(rig).rate_hz
    assert rig.model.plane_wave_limit_hz > 2000.0 and model_rate > 4000

    def tone(rate, f_hz=1917.0, seconds=3.0):
        t = np.arange(int(seconds * rate)) / rate
        return 0.05 * np.sin(2 * np.pi * f_hz * t + 0.3) * np.minimum(1.0, t) * np.minimum(1.0, seconds - t)

    y = to_model_rate(tone(4000, 1900.0), 4000, model_rate)
    ref = tone(model_rate, 1900.0)[:y.size]
    assert y.size == ref.size
    assert np.max(np.abs(y - ref)) < 0.05 * 1e-2  # within 1 % of the amplitude, fades included
    low = signal_report(rig, tone(4000), 4000, flames=False).ceiling_db
    high = signal_report(rig, tone(48000), 48000, flames=False).ceiling_db
    assert low == pytest.approx(high, abs=0.1)
