"""Each cue's sound is built once per check, render, run or lock pass (issue 16 item 3).

The counter wraps :func:`showkit.show.sources.cue_signal`, the one builder; the
reference for "the same sound" is that builder called afresh with no memo.
"""

from __future__ import annotations

import dataclasses
import json
import os
from collections import Counter

import numpy as np
import pytest
import soundfile as sf
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from showkit.errors import InputError, SheetError
from showkit.rigfile import load_rig
from showkit.show import sources
from showkit.show.lock import CueCheck, check_sheet, lock_sheet
from showkit.show.render import render_cue, render_for_playback, render_iter
from showkit.show.sheet import AudioSource, Cue, GlideSource, PauseSource, Sheet, ToneSource, load_sheet
from showkit.show.sources import SignalMemo, cue_signal
from showkit.show.status import CueStatus

SHEET = '''title = "built once"
rig = "demo"
format = 1

[[cue]]
id = "hum"
tone = { mode = 2, duration = 0.4 }
gain = -40
fade_in = 0.05
fade_out = 0.05

[[cue]]
id = "clip"
audio = "clip.wav"
start = 0.1
end = 0.5
gain = -30
fade_in = 0.02
fade_out = 0.02

[[cue]]
id = "talk"
pause = { duration = 0.3 }
'''


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    folder = tmp_path_factory.mktemp("memo")
    rng = np.random.default_rng(1)
    sf.write(folder / "clip.wav", (0.1 * rng.standard_normal(48000 // 2)).astype(np.float32), 48000,
             subtype="FLOAT")
    (folder / "show.toml").write_text(SHEET)
    sheet = load_sheet(folder / "show.toml")
    lock_sheet(sheet)
    from showkit.show.sheet import save_sheet

    save_sheet(sheet)
    return folder


@pytest.fixture
def builds(monkeypatch):
    count: Counter = Counter()
    real = sources.cue_signal

    def counted(sheet, rig, cue):
        count[cue.id] += 1
        return real(sheet, rig, cue)

    monkeypatch.setattr(sources, "cue_signal", counted)
    return count


def test_check_render_run_and_lock_build_each_sound_once(folder, builds):
    sheet = load_sheet(folder / "show.toml")
    ids = [c.id for c in sheet.cues]
    assert [c.status for c in check_sheet(sheet)] == ["ok"] * 3
    assert builds == Counter(ids)  # the check

    builds.clear()
    rendered = list(render_iter(sheet, load_rig()))
    assert [c.id for c in rendered] == ids and builds == Counter(ids)  # the render

    builds.clear()
    cues, _ = render_for_playback(folder / "show.toml")
    assert all(c.playable for c in cues) and builds == Counter(ids)  # `showkit run`, the rig file's gas

    builds.clear()
    warm, _ = render_for_playback(folder / "show.toml", temperature_k=load_rig().temperature_k + 8.0)
    assert all(c.playable for c in warm)
    # the audio passage and the pause once; the tone on a mode once for each gas (its frequency moves)
    assert builds == Counter({"hum": 2, "clip": 1, "talk": 1})
    assert warm[0].samples.size == cues[0].samples.size and not np.array_equal(warm[0].samples, cues[0].samples)

    builds.clear()
    memo = SignalMemo()
    lock_sheet(sheet, signals=memo)
    assert [c.status for c in check_sheet(sheet, signals=memo)] == ["ok"] * 3
    assert builds == Counter(ids)  # `showkit lock`: the lock and the check after it


def test_a_memoised_render_is_the_render_without_one(folder):
    """The memo changes nothing but the work: the same samples, gain and verification."""
    sheet = load_sheet(folder / "show.toml")
    rig = load_rig()
    memo = SignalMemo()
    for cue in sheet.cues:
        check_sheet(sheet, rig, signals=memo)
        a, b = render_cue(sheet, rig, cue, memo), render_cue(sheet, rig, cue)
        assert np.array_equal(a.samples, b.samples) and a.rate_hz == b.rate_hz
        assert (a.gain_db, a.ceiling_db, a.margin_pa, a.min_pressure_pa) == \
            (b.gain_db, b.ceiling_db, b.margin_pa, b.min_pressure_pa)
        assert a.verify_at is not None and a.status is CueStatus.OK


def test_a_changed_file_is_built_again(tmp_path):
    """The key holds the file's size and modification time: a new recording is a new sound."""
    path = tmp_path / "x.wav"
    sf.write(path, 0.1 * np.ones(4800), 48000, subtype="FLOAT")
    sheet = Sheet(title="t", rig="demo", path=tmp_path / "s.toml")
    cue = Cue(id="x", source=AudioSource("x.wav", 0.0, None))
    rig = load_rig()
    memo = SignalMemo()
    first = memo.get(sheet, rig, cue)
    stat = os.stat(path)
    sf.write(path, 0.2 * np.ones(4800), 48000, subtype="FLOAT")  # same size, new samples
    os.utime(path, ns=(stat.st_atime_ns, stat.st_mtime_ns + 1_000_000))
    second = memo.get(sheet, rig, cue)
    assert second.source_hash == cue_signal(sheet, rig, cue).source_hash != first.source_hash


def test_memoised_samples_cannot_be_changed(tmp_path):
    sheet = Sheet(title="t", rig="demo", path=tmp_path / "s.toml")
    sig = SignalMemo().get(sheet, load_rig(), Cue(id="p", source=PauseSource(0.1)))
    with pytest.raises(ValueError):
        sig.samples[0] = 1.0


def test_the_memo_lets_go_beyond_its_budget(tmp_path):
    sheet = Sheet(title="t", rig="demo", path=tmp_path / "s.toml")
    memo = SignalMemo(max_samples=48000)
    rig = load_rig()
    for k in range(4):
        memo.get(sheet, rig, Cue(id=f"p{k}", source=PauseSource(0.4 + 0.1 * k)))
    assert sum(s.samples.size for s in memo._signals.values()) <= 48000 and len(memo) >= 1


# --- key completeness: whatever the order of requests, the memo gives what a fresh build gives

_RIG = load_rig()
_TEMPS_K = (_RIG.temperature_k, _RIG.temperature_k + 10.0)
_STATICS_PA = (_RIG.static_pa, 0.5 * _RIG.static_pa)

_fades = st.sampled_from([0.0, 0.02])
# near twins: the two differ in one thing only (a pause of 0.03 s is shorter than two fades of 0.02 s)
_TWINS = (
    (ToneSource(0.05, mode=2), ToneSource(0.08, mode=2)), (ToneSource(0.05, mode=2), ToneSource(0.05, mode=3)),
    (ToneSource(0.05, frequency_hz=150.0), ToneSource(0.05, frequency_hz=151.0)),
    (ToneSource(0.05, frequency_hz=150.0), ToneSource(0.05, frequency_hz=4.0e4)),
    (GlideSource(0.05, from_mode=1, to_mode=2), GlideSource(0.05, from_mode=1, to_mode=3)),
    (PauseSource(0.05), PauseSource(0.03)),
    (AudioSource("a.wav"), AudioSource("a.wav", 0.0, 0.05)), (AudioSource("a.wav"), AudioSource("a.wav", 0.01)),
    (AudioSource("a.wav"), AudioSource("b.wav")), (AudioSource("a.wav"), AudioSource("sub/../a.wav")),
)
# a pair of twins (and maybe another) asked for again and again, each time with other fades, gas,
# pressure or sheet: the requests that a key missing a part would answer wrongly
_requests = st.tuples(
    st.permutations(_TWINS).map(lambda pairs: [*pairs[0], *pairs[1], *pairs[2]]),
    st.lists(st.tuples(st.integers(0, 5), _fades, _fades, st.sampled_from(_TEMPS_K),
                       st.sampled_from(_STATICS_PA), st.sampled_from(["s1", "s2"])), min_size=2, max_size=8))


@pytest.fixture(scope="module")
def audio_folder(tmp_path_factory):
    folder = tmp_path_factory.mktemp("memo_keys")
    (folder / "sub").mkdir()
    rng = np.random.default_rng(2)
    for name, rate in (("a.wav", 48000), ("b.wav", 32000)):  # same size and time: only the name tells
        sf.write(folder / name, (0.1 * rng.standard_normal(4800)).astype(np.float32), rate, subtype="FLOAT")
        os.utime(folder / name, ns=(1_700_000_000 * 10**9, 1_700_000_000 * 10**9))
    return folder


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(requests=_requests)
def test_a_memoised_signal_is_never_reused_for_another_sound(requests, audio_folder):
    """Key completeness (hypothesis): across sources, passages, fades, gas temperatures, static
    pressures, sheets and rates, each answer of one memo equals a fresh build (the reference:
    :func:`cue_signal` with no memo), or both refuse."""
    memo = SignalMemo()
    sheets = {name: Sheet(title=name, rig="demo", path=audio_folder / f"{name}.toml") for name in ("s1", "s2")}
    pool, asks = requests
    for k, (which, fade_in, fade_out, temp_k, static_pa, sheet_name) in enumerate(asks):
        source = pool[which % len(pool)]
        rig = _RIG.with_conditions(static_pa=static_pa, temperature_k=temp_k)
        cue = Cue(id=f"c{k}", source=source, fade_in_s=fade_in, fade_out_s=fade_out)
        sheet = sheets[sheet_name]
        try:
            fresh = cue_signal(sheet, rig, cue)
        except SheetError as exc:
            with pytest.raises(SheetError) as again:
                memo.get(sheet, rig, cue)
            assert again.value.line() == exc.line()
            continue
        got = memo.get(sheet, rig, cue)
        assert got.rate_hz == fresh.rate_hz and got.source_hash == fresh.source_hash
        assert np.array_equal(got.samples, fresh.samples)
        assert (got.frequency_hz, got.to_frequency_hz) == (fresh.frequency_hz, fresh.to_frequency_hz)


# --- the statuses: one enum whose members are their text


def test_statuses_are_one_enum_that_reads_as_its_text():
    """Files, logs, JSON and code comparing with the plain words see the same spelling."""
    check = CueCheck("a", -10.0, -5.0, 5.0, "ok", "fine")  # text in: a member out
    assert check.status is CueStatus.OK and check.status == "ok" and f"{check.status}" == "ok"
    assert json.loads(json.dumps(check.to_json()))["status"] == "ok"
    assert {"ok": "ok", "over": "OVER"}[CueStatus.OVER] == "OVER"  # a dict keyed by the text (the UI's)
    assert CueStatus.STALE in ("stale", "error") and CueStatus.ERROR != "ok"
    assert [str(s) for s in CueStatus] == ["ok", "over", "stale", "error"]
    with pytest.raises(InputError, match="status must be one of"):
        CueCheck("a", -10.0, None, None, "fine", "")
    with pytest.raises(InputError, match="status must be one of"):
        dataclasses.replace(check, status="OK")
