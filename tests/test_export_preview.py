"""The flame preview video: its frames, rate, length and sound, and the flames it draws.

The video is probed with the ffmpeg binary that imageio-ffmpeg ships (an
independent reader of the file); the drawn flames are read back from the
pixels and compared with the flame model's frames at the ceiling that
`showkit ceiling --json` reports.
"""

from __future__ import annotations

import json
import re
import subprocess

import numpy as np
import pytest

from showkit.cli.main import main

SIZE = (480, 270)


def _ffmpeg() -> str:
    import imageio_ffmpeg

    return imageio_ffmpeg.get_ffmpeg_exe()


def _probe(path) -> dict:
    """Streams, frame rate and duration from ffmpeg's own report; frames counted by decoding."""
    import imageio_ffmpeg

    err = subprocess.run([_ffmpeg(), "-hide_banner", "-i", str(path)], capture_output=True, text=True,
                         check=False).stderr  # ffmpeg -i alone exits 1: it was given no output
    fps = float(re.search(r"Video: .* ([\d.]+) fps", err).group(1))
    frames, secs = imageio_ffmpeg.count_frames_and_secs(str(path))
    return {"fps": fps, "frames": frames, "seconds": secs, "audio": "Audio:" in err}


def _audio_seconds(path, tmp_path) -> float:
    """The sound stream decoded to WAV by ffmpeg, its length read by soundfile."""
    import soundfile as sf

    wav = tmp_path / "sound.wav"
    subprocess.run([_ffmpeg(), "-loglevel", "error", "-y", "-i", str(path), "-vn", "-c:a", "pcm_f32le", str(wav)],
                   check=True)
    return sf.info(str(wav)).duration


def _frame_at(path, k: int, size) -> np.ndarray:
    """Video frame ``k`` decoded by ffmpeg (imageio-ffmpeg's reader) as RGB."""
    import imageio_ffmpeg

    w, h = size
    reader = imageio_ffmpeg.read_frames(str(path))
    meta = next(reader)
    assert tuple(meta["size"]) == (w, h)
    try:
        for i, raw in enumerate(reader):
            if i == k:
                return np.frombuffer(raw, np.uint8).reshape(h, w, 3)
    finally:
        reader.close()
    raise AssertionError(f"the video has no frame {k}")


@pytest.fixture(scope="module")
def sheet_video(tmp_path_factory):
    from export_support import exported_short_sheet

    sheet, out, _ = exported_short_sheet(tmp_path_factory, "preview", "show.mp4", "--size", "480x270")
    return sheet, out


def test_sheet_video_frames_rate_and_sound(sheet_video, tmp_path):
    from showkit.export.preview import CARD_S
    from showkit.show.lock import sheet_rig
    from showkit.show.render import render_cue
    from showkit.show.sheet import load_sheet

    sheet_path, out = sheet_video
    sheet = load_sheet(sheet_path)
    rig = sheet_rig(sheet)
    # what the show plays: the two ok cues as `showkit render` makes them, a silent card for the others
    played = sum(v.samples.size / v.rate_hz for v in (render_cue(sheet, rig, sheet.cue(c)) for c in ("hum", "notes")))
    expected_s = played + 2 * CARD_S
    p = _probe(out)
    assert p["fps"] == 30
    assert abs(p["frames"] - round(expected_s * 30)) <= 1
    assert abs(p["frames"] / 30 - expected_s) <= 1 / 30
    assert p["audio"]
    assert abs(_audio_seconds(out, tmp_path) - expected_s) <= 1 / 30


@pytest.fixture(scope="module")
def tone_track(tmp_path_factory):
    import soundfile as sf

    from showkit.physics.modes import find_modes
    from showkit.rigfile import load_rig
    from showkit.show.sources import fade, tone

    folder = tmp_path_factory.mktemp("tone")
    # the demo rig's mode 4 as the model computes it (`showkit modes`), 2 s with 0.3 s fades
    f4 = next(m.frequency_hz for m in find_modes(load_rig().model) if m.n == 4)
    x = fade(tone(f4, 2.0), 48000, 0.3, 0.3)
    path = folder / "mode4.wav"
    sf.write(path, 0.5 * x, 48000, subtype="FLOAT")
    return path


def _drawn_px(img: np.ndarray, layout, threshold: int) -> np.ndarray:
    """Flame height in pixels at each hole's centre column: lit pixels above the base."""
    column = img[layout.top_y:layout.base_y, layout.hole_x].max(axis=2)  # (rows, holes)
    return (column > threshold).sum(axis=0)


def test_drawn_flames_match_the_ceiling_flames(tone_track, tmp_path, capsys):
    from showkit.analysis.pressure import frame_lag, passage_report
    from showkit.export.preview import Painter, make_layout, track_timeline, write_video
    from showkit.rigfile import load_rig

    rig = load_rig()
    assert main(["ceiling", str(tone_track), "--json"]) == 0
    ceiling = json.loads(capsys.readouterr().out)
    tl = track_timeline(rig, tone_track)  # the default gain: the ceiling
    seg = tl.segments[0]
    assert seg.gain_db == pytest.approx(ceiling["ceiling_db"], abs=1e-9)
    report = passage_report(rig, tone_track)  # the flame frames at that ceiling
    lag = frame_lag(rig)
    magnify = 10.0
    layout = make_layout(tl.positions_m, tl.length_m, SIZE, magnify)
    painter = Painter(tl, layout)
    resolution = 1.0 / (layout.unit_px * magnify)  # one pixel, in relative flame height
    contrasts = []
    for k in range(tl.frames):
        img = painter.draw(k)
        drawn = layout.height_of_px(_drawn_px(img, layout, 40))
        model = report.frames.height[k + lag]
        assert np.max(np.abs(drawn - model)) <= resolution + 1e-9, k
        contrasts.append((drawn.max() - drawn.min()) / drawn.max())
    # the drawn rows' contrast is the contrast per frame whose median `showkit ceiling --json`
    # reports (its median also runs over the ring-down after the sound), within two pixels
    assert ceiling["contrast"] == pytest.approx(report.contrast, abs=1e-12)
    per_frame = report.contrast_per_frame[lag:lag + tl.frames]
    assert np.max(np.abs(np.array(contrasts) - per_frame)) <= 2 * resolution / 0.9
    assert max(contrasts) > 20 * resolution  # the pattern is there to be seen, magnified
    # the same frames survive encoding: a frame decoded from the video, within 2 pixels
    out = tmp_path / "tone.mp4"
    write_video(tl, out, SIZE, magnify)
    k = 30
    img = _frame_at(out, k, SIZE)
    drawn = _drawn_px(img, layout, 60)
    expected = layout.flame_px(report.frames.height[k + lag])
    assert np.max(np.abs(drawn - expected)) <= 2.0


def test_track_preview_refuses_above_the_ceiling(tone_track, tmp_path, capsys):
    out = tmp_path / "loud.mp4"
    assert main(["preview", str(tone_track), "-o", str(out), "--gain", "+60"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "above this passage's ceiling" in err[0]
    assert not out.exists()
    assert main(["preview", str(tone_track), "-o", str(out), "--magnify", "0"]) == 2
    assert main(["preview", str(tone_track), "-o", str(out), "--gain", "nan"]) == 2
    assert not out.exists()


def test_magnify_is_written_on_every_frame(tone_track):
    """The scale words are part of the background every frame is drawn on."""
    from showkit.export.preview import Painter, make_layout, track_timeline
    from showkit.rigfile import load_rig

    tl = track_timeline(load_rig(), tone_track, gain_db=-60.0)
    true = Painter(tl, make_layout(tl.positions_m, tl.length_m, SIZE, 1.0))
    big = Painter(tl, make_layout(tl.positions_m, tl.length_m, SIZE, 25.0))
    a, b = true.draw(10), big.draw(10)
    # the text rows under the tube differ (TRUE SCALE vs MAGNIFIED x25), in red on the magnified one
    rows = slice(true.L.base_y + 10, true.L.height - 20)
    assert np.any(a[rows] != b[rows])
    red = (b[rows, :, 0] > 150) & (b[rows, :, 1] < 90)
    assert red.sum() > 50 and not ((a[rows, :, 0] > 150) & (a[rows, :, 1] < 90)).any()


def test_drawing_reads_back_for_any_heights():
    """Whatever the heights and the magnification, each hole's centre column is lit for the
    flame's drawn height to within one pixel (clipped to the picture), and nowhere else."""
    from hypothesis import given, settings
    from hypothesis import strategies as st
    from hypothesis.extra.numpy import arrays

    from showkit.export.preview import Painter, Segment, Timeline, make_layout

    holes = 24
    positions = tuple(0.1 + 0.08 * np.arange(holes))
    heights = arrays(np.float32, (3, holes), elements=st.floats(0.0, 2.5, width=32))

    @settings(max_examples=40, deadline=None)
    @given(heights, st.floats(1.0, 50.0), st.booleans())
    def check(h, magnify, with_air):
        air = np.zeros_like(h)
        if with_air:
            air[:, ::3] = 0.5
        tl = Timeline("t", "rig", positions, 2.0, 20.0,
                      [Segment("cue", "", 0.0, 0.1, h, air)], np.zeros(4800, np.float32), 48000)
        layout = make_layout(positions, 2.0, (320, 180), magnify)
        img = Painter(tl, layout).draw(1)
        drawn = _drawn_px(img, layout, 40)
        assert np.all(np.abs(drawn - layout.flame_px(h[1])) <= 1.0)
        # holes drawing in air are drawn in the air colour (blue over red), the others are not
        lit = img[layout.base_y - 1, layout.hole_x]
        blue = lit[:, 2] > lit[:, 0]
        shown = drawn > 0
        assert np.array_equal(blue[shown], (air[1] > 0)[shown])

    check()


def test_sheet_preview_reads_its_own_rig_once(tmp_path, monkeypatch, capsys):
    """A sheet's preview read a rig twice (--rig or the demo to check --static, then the sheet's
    own): now only the sheet's, once, and --rig (which a sheet preview never drew on) is
    refused in one line.  The sheet here has no cues, so the preview stops at once after
    reading the rig."""
    from export_support import count_rig_reads

    sheet = tmp_path / "empty.toml"
    sheet.write_text('title = "empty"\nrig = "demo"\nformat = 1\n')
    reads = count_rig_reads(monkeypatch)
    out = tmp_path / "show.mp4"
    assert main(["preview", str(sheet), "-o", str(out), "--static", "18 Pa"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "no cues" in err[0]
    assert len(reads) == 1
    assert main(["preview", str(sheet), "-o", str(out), "--rig", str(sheet)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--rig" in err[0] and "track preview" in err[0]
    assert not out.exists()
