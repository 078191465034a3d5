"""Locks, stale detection, today's headroom and the verified render (issue 5)."""

from __future__ import annotations

import math
import shutil

import numpy as np
import pytest
import soundfile as sf

from showkit import ANALYSIS_VERSION
from showkit.analysis.pressure import hole_filters
from showkit.errors import SheetError
from showkit.physics.modes import find_modes
from showkit.physics.response import pressure_signal
from showkit.rigfile import demo_rig_path, load_rig
from showkit.show import lock as lockmod
from showkit.show.lock import check_sheet, lock_sheet, sheet_rig
from showkit.show.render import VERIFY_TOLERANCE, render_cue, render_for_playback, render_sheet
from showkit.show.sheet import load_sheet, save_sheet
from showkit.show.sources import cue_signal

RATE = 44100


def _write_track(path, freqs, seconds=6.0, amp=0.3, burst_at=None):
    t = np.arange(int(seconds * RATE)) / RATE
    x = sum(amp / len(freqs) * np.sin(2 * np.pi * f * t) for f in freqs)
    if burst_at is not None:
        # a loud moment: the same tones ten times louder for 0.4 s
        k, n = int(burst_at * RATE), int(0.4 * RATE)
        x[k:k + n] *= 1.0 + 9.0 * np.hanning(n)
    sf.write(path, np.clip(x, -1, 1), RATE, subtype="PCM_16")


@pytest.fixture
def show(tmp_path):
    """A sheet with two audio cues (two files), a tone, a glide and a pause, on a copy of the demo rig."""
    rig = load_rig()
    modes = {m.n: m.frequency_hz for m in find_modes(rig.model)}
    shutil.copy(demo_rig_path(), tmp_path / "rig.toml")
    _write_track(tmp_path / "a.wav", [modes[3], modes[5]])
    _write_track(tmp_path / "b.wav", [modes[4]], seconds=10.0, amp=0.05, burst_at=7.0)
    (tmp_path / "show.toml").write_text('''title = "test show"
rig = "rig.toml"
format = 1

[[cue]]
id = "pa"
audio = "a.wav"
start = 0.5
end = 5.0
gain = -6
fade_in = 0.3
fade_out = 0.5

[[cue]]
id = "pb"
audio = "b.wav"
start = 0.0
end = 9.5
gain = 0
fade_in = 0.3
fade_out = 0.5

[[cue]]
id = "t3"
tone = { mode = 3, duration = 3 }
gain = -30
fade_in = 0.5
fade_out = 0.5

[[cue]]
id = "g"
glide = { from_mode = 2, to_mode = 6, duration = 4 }
gain = -40
fade_in = 0.3
fade_out = 0.3
then = "next"

[[cue]]
id = "quiet"
pause = { duration = 2 }
''')
    return tmp_path


#: Locks made in this module, by the bytes of the files a lock reads (sheet, rig, tracks): the tests
#: lock the same show, so it is locked once and the locked sheet written into each test's folder.
_LOCKS: dict = {}


def _locked(folder):
    import hashlib

    key = hashlib.sha256(b"".join((folder / n).read_bytes() for n in ("show.toml", "rig.toml", "a.wav", "b.wav")))
    if key.hexdigest() in _LOCKS:
        text, messages = _LOCKS[key.hexdigest()]
        (folder / "show.toml").write_text(text, encoding="utf-8")
        return load_sheet(folder / "show.toml"), list(messages)
    sheet = load_sheet(folder / "show.toml")
    messages = lock_sheet(sheet)
    save_sheet(sheet)
    _LOCKS[key.hexdigest()] = ((folder / "show.toml").read_text(encoding="utf-8"), list(messages))
    return load_sheet(folder / "show.toml"), messages


def test_lock_clamps_gains_above_the_ceiling_and_names_the_cue(show):
    sheet, messages = _locked(show)
    for cue in sheet.cues:
        assert cue.lock is not None and cue.lock.analysis_version == ANALYSIS_VERSION
        assert cue.gain_db <= cue.lock.ceiling_db
    # pb was asked at 0 dB, far above the pressure ceiling of a tone on a mode
    assert any(m.startswith("cue pb:") and "clamped" in m for m in messages)
    assert all(c.status == "ok" for c in check_sheet(sheet))


def test_tone_cues_land_on_mode_frequencies_and_glides_are_exponential(show):
    sheet, _ = _locked(show)
    rig = sheet_rig(sheet)
    modes = {m.n: m.frequency_hz for m in find_modes(rig.model)}
    tone = sheet.cue("t3")
    assert tone.lock.frequency_hz == pytest.approx(modes[3], rel=1e-9)
    sig = cue_signal(sheet, rig, tone)
    spectrum = np.abs(np.fft.rfft(sig.samples * np.hanning(sig.samples.size), n=1 << 20))
    peak = np.argmax(spectrum) * sig.rate_hz / (1 << 20)
    assert peak == pytest.approx(modes[3], rel=2e-4)
    # glide: instantaneous frequency from the analytic signal's phase (scipy as reference)
    from scipy.signal import hilbert

    g = cue_signal(sheet, rig, sheet.cue("g"))
    phase = np.unwrap(np.angle(hilbert(g.samples)))
    inst = np.diff(phase) * g.rate_hz / (2 * np.pi)
    f1, f2, duration = modes[2], modes[6], 4.0
    for frac in (0.2, 0.4, 0.6, 0.8):
        k = int(frac * duration * g.rate_hz)
        expected = f1 * (f2 / f1) ** frac  # exponential sweep (Farina 2000)
        assert np.median(inst[k - 200:k + 200]) == pytest.approx(expected, rel=3e-3)


def test_changing_one_byte_of_one_audio_file_makes_exactly_that_cue_stale(show):
    sheet, _ = _locked(show)
    path = show / "b.wav"
    data = bytearray(path.read_bytes())
    data[44 + 2 * RATE + 1] ^= 0x40  # a sample one second in, inside the passage
    path.write_bytes(bytes(data))
    states = {c.id: c.status for c in check_sheet(load_sheet(show / "show.toml"))}
    assert states == {"pa": "ok", "pb": "stale", "t3": "ok", "g": "ok", "quiet": "ok"}


def test_changing_the_bore_or_the_calibration_makes_every_cue_stale(show):
    _locked(show)
    rig_text = (show / "rig.toml").read_text()
    (show / "rig.toml").write_text(rig_text.replace('bore = "80 mm"', 'bore = "81 mm"'))
    checks = check_sheet(load_sheet(show / "show.toml"))
    assert {c.status for c in checks} == {"stale"}
    assert all(c.ceiling_db is None and "lock" in c.message for c in checks)
    (show / "rig.toml").write_text(rig_text.replace('reference_pressure = "0.27 Pa"', 'reference_pressure = "0.3 Pa"'))
    checks = check_sheet(load_sheet(show / "show.toml"))
    assert {c.status for c in checks} == {"stale"}
    (show / "rig.toml").write_text(rig_text)
    assert {c.status for c in check_sheet(load_sheet(show / "show.toml"))} == {"ok"}


def test_a_new_analysis_version_makes_every_cue_stale(show, monkeypatch):
    _locked(show)
    monkeypatch.setattr(lockmod, "ANALYSIS_VERSION", ANALYSIS_VERSION + 1)
    assert {c.status for c in check_sheet(load_sheet(show / "show.toml"))} == {"stale"}


def test_todays_static_pressure_rescales_exactly_and_lists_what_must_come_down(show):
    sheet, _ = _locked(show)
    rig = sheet_rig(sheet)
    at_lock = {c.id: c for c in check_sheet(sheet)}
    doubled = {c.id: c for c in check_sheet(sheet, rig, static_pa=2 * rig.static_pa)}
    halved = {c.id: c for c in check_sheet(sheet, rig, static_pa=rig.static_pa / 2)}
    for cid in ("pa", "pb", "t3", "g"):
        # every one of these cues is pressure-limited with room below full scale, so
        # doubling dP0 must raise its ceiling by exactly 6.02 dB (DEVELOPERS.md Methods §7)
        assert sheet.cue(cid).lock.limited_by == "pressure"
        assert at_lock[cid].ceiling_db + 20 * math.log10(2) < sheet.cue(cid).lock.full_scale_db
        assert doubled[cid].ceiling_db - at_lock[cid].ceiling_db == pytest.approx(20 * math.log10(2), abs=1e-9)
        assert halved[cid].ceiling_db - at_lock[cid].ceiling_db == pytest.approx(-20 * math.log10(2), abs=1e-9)
    # pb was clamped to its ceiling: at half the pressure it must come down by 6.02 dB
    assert halved["pb"].status == "over"
    assert "6.0" in halved["pb"].message or "6.02" in halved["pb"].message


def test_render_refuses_stale_and_over_cues(show):
    sheet, _ = _locked(show)
    rig = sheet_rig(sheet)
    with pytest.raises(SheetError, match="cue pb"):
        render_cue(sheet, rig.with_conditions(static_pa=rig.static_pa / 2), sheet.cue("pb"))
    data = bytearray((show / "a.wav").read_bytes())
    data[44 + 4 * RATE: 44 + 4 * RATE + 1000] = b"\0" * 1000  # two seconds in: inside cue pa
    (show / "a.wav").write_bytes(bytes(data))
    sheet = load_sheet(show / "show.toml")
    with pytest.raises(SheetError) as info:
        render_sheet(sheet, rig)
    assert "cue pa" in info.value.line() and "showkit lock" in info.value.line()


def test_rendered_cues_keep_every_hole_above_the_safe_line(show):
    sheet, _ = _locked(show)
    rig = sheet_rig(sheet)
    rendered = render_sheet(sheet, rig)
    filters = hole_filters(rig)
    for cue in rendered:
        assert cue.margin_pa >= -VERIFY_TOLERANCE * rig.static_pa
        if not cue.samples.any():
            continue
        import soxr

        x = soxr.resample(cue.samples.astype(float), cue.rate_hz, filters.rate_hz, quality="VHQ")
        # independent check: direct convolution of the whole cue, real pressure
        p = pressure_signal(filters, x).real
        assert rig.static_pa + p.min() >= rig.reserve * rig.static_pa * (1 - 1e-3)


def test_the_flame_row_from_the_verification_is_the_cues_own(show):
    """render_cue(flames=True) keeps the flame row of the cue as it plays (the Run view draws it
    instead of simulating the cue again): the row signal_flames gives for the rendered samples at
    0 dB (the show book's and the preview's), frame for frame; the gate (margin, lowest pressure)
    is the same with or without it; and the row follows the cue's level (a review found the
    Run view drawing every cue as if at its ceiling)."""
    import dataclasses

    from showkit.analysis.pressure import frame_lag, signal_flames, signal_report
    from showkit.show.playlist import resample_cue
    from showkit.show.render import flame_row

    sheet, _ = _locked(show)
    rig = sheet_rig(sheet)
    cue = next(c for c in sheet.cues if c.gain_db > -60)
    plain = render_cue(sheet, rig, cue)
    with_row = render_cue(sheet, rig, cue, flames=True)
    assert plain.flames is None and with_row.flames is not None
    assert (with_row.margin_pa, with_row.min_pressure_pa) == (plain.margin_pa, plain.min_pressure_pa)
    frames = signal_flames(rig, with_row.samples, with_row.rate_hz, 0.0)
    direct = flame_row(frames, frame_lag(rig))
    np.testing.assert_array_equal(with_row.flames[0], direct[0])
    # row k is the flames at the play position k (the responses' delay taken off), as the preview
    # reads frame floor(t * rate) + lag of the pass
    assert frame_lag(rig) >= 1
    np.testing.assert_array_equal(direct[0], np.asarray(frames.height)[frame_lag(rig):])
    assert with_row.flames[1:] == direct[1:]
    assert direct[0].size > 0 and direct[3] > direct[2]   # a row that moves, not an empty one
    quieter = render_cue(sheet, rig, dataclasses.replace(cue, gain_db=cue.gain_db - 12.0), flames=True).flames
    assert quieter[3] - quieter[2] < 0.6 * (direct[3] - direct[2])   # 12 dB down: a flatter row
    # resampled for a device it is the same sound: the row goes with it
    assert resample_cue(with_row, 44100 if with_row.rate_hz != 44100 else 48000).flames is with_row.flames
    # a pause moves no flame: the still row (height 1 at every hole) for its 2 s, with no simulation
    pause = next(c for c in sheet.cues if c.kind == "pause")
    still = render_cue(sheet, rig, pause, flames=True).flames
    assert still[0].shape == (60, len(rig.geometry.hole_positions_m)) and np.all(still[0] == 1.0)
    silent = signal_report(rig, np.zeros(2 * 48000), 48000, flames=True).frames.height
    np.testing.assert_allclose(still[0], np.asarray(silent)[:60], atol=1e-6)


def test_rider_lifts_the_quiet_part_and_still_holds_the_line(show):
    """ride = true: the loud burst sets the ceiling; the sustained tone around it is lifted."""
    text = (show / "show.toml").read_text().replace('id = "pb"\n', 'id = "pb"\nride = true\n')
    (show / "show.toml").write_text(text)
    sheet, _ = _locked(show)
    rig = sheet_rig(sheet)
    ridden = render_cue(sheet, rig, sheet.cue("pb"))
    plain = render_cue(sheet, rig, __import__("dataclasses").replace(sheet.cue("pb"), ride=False))
    rate = ridden.rate_hz
    quiet = slice(int(1.0 * rate), int(4.0 * rate))  # well before the burst at 7 s (and its ring time)
    lift_db = 20 * np.log10(np.sqrt(np.mean(ridden.samples[quiet].astype(float) ** 2))
                            / np.sqrt(np.mean(plain.samples[quiet].astype(float) ** 2)))
    assert lift_db > 1.0
    # verified against the pressure model, with the render's float32 slack
    assert ridden.margin_pa >= -VERIFY_TOLERANCE * rig.static_pa
    ratio = ridden.samples.astype(float) / np.where(plain.samples == 0, np.nan, plain.samples)
    steps = np.abs(np.diff(ratio[np.isfinite(ratio)][::50]))
    assert np.nanmax(steps) < 0.05  # a smooth gain curve: no jumps (clicks)


def test_the_rider_keeps_a_cue_set_below_its_ceiling_below_it(show):
    """A presenter's ridden cue at -40 dB under a -29.2 dB ceiling was lifted to the safe line
    (margin 0, the headroom they chose gone): the rider lifts the quiet parts to the level of the
    cue's own peaks, so its lowest hole pressure stays where the cue's gain puts it."""
    import dataclasses

    sheet, _ = _locked(show)
    rig = sheet_rig(sheet)
    cue = sheet.cue("pb")
    below = dataclasses.replace(cue, gain_db=cue.lock.ceiling_db - 10.0)
    plain = render_cue(sheet, rig, below)
    ridden = render_cue(sheet, rig, dataclasses.replace(below, ride=True))
    rate = ridden.rate_hz
    quiet = slice(int(1.0 * rate), int(4.0 * rate))
    lift_db = 20 * np.log10(np.sqrt(np.mean(ridden.samples[quiet].astype(float) ** 2))
                            / np.sqrt(np.mean(plain.samples[quiet].astype(float) ** 2)))
    assert lift_db > 1.0                                   # the quiet part is still lifted
    # the headroom is kept: the ridden cue's lowest hole pressure is the plain cue's (10 dB below
    # the ceiling leaves most of the swing unused; before, the margin went to 0)
    assert ridden.min_pressure_pa >= plain.min_pressure_pa - VERIFY_TOLERANCE * rig.static_pa
    assert ridden.margin_pa > 0.5 * plain.margin_pa


def test_render_for_playback_reports_problems_and_shifts_tones_with_temperature(show):
    sheet, _ = _locked(show)
    rig = sheet_rig(sheet)
    cues, problems = render_for_playback(show / "show.toml")
    assert [c.status for c in cues] == ["ok"] * 5 and len(problems) == 1
    warm, problems = render_for_playback(show / "show.toml", temperature_k=rig.temperature_k + 10)
    t3 = next(c for c in warm if c.id == "t3")
    cold_t3 = next(c for c in cues if c.id == "t3")
    assert t3.status == "ok", t3.message  # the tone still fits in warmer gas
    f_cold = np.argmax(np.abs(np.fft.rfft(cold_t3.samples, n=1 << 20)))
    f_warm = np.argmax(np.abs(np.fft.rfft(t3.samples, n=1 << 20)))
    # c ~ sqrt(T): +10 K near 293 K raises the modes by about 1.7 % (DEVELOPERS.md Methods §2)
    assert f_warm / f_cold == pytest.approx(math.sqrt((rig.temperature_k + 10) / rig.temperature_k), rel=3e-3)
    low, problems = render_for_playback(show / "show.toml", static_pa=rig.static_pa / 2)
    assert {c.id for c in low if c.status == "over"} >= {"pb"}
    assert any("cue pb" in p for p in problems)
