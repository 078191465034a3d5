"""The ceiling memo of ``show.lock`` (``_CEILINGS``): the same sound on the same rig is simulated once,
and nothing else ever reads its number.

Reference: the memo's value is compared with the same computation without it (``_ceiling_now``, which
calls ``showkit.analysis.pressure.signal_report`` directly) -- equal to the last bit, since a hit must be
the very number a fresh lock would give.
"""

from __future__ import annotations

import threading
import time

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from showkit.analysis import pressure
from showkit.rigfile import load_rig
from showkit.show import lock as lock_mod
from showkit.show.sources import CueSignal

RATE_HZ = 48_000


def _signal(freq_hz: float = 300.0, amp: float = 0.2, seconds: float = 0.1, rate_hz: int = RATE_HZ) -> CueSignal:
    t = np.arange(int(seconds * rate_hz)) / rate_hz
    x = amp * np.sin(2 * np.pi * freq_hz * t) * np.hanning(t.size)
    return CueSignal(x, rate_hz, "test")


@pytest.fixture
def rig():
    return load_rig()


@pytest.fixture
def calls(monkeypatch):
    """Counts the pressure simulations (``signal_report``) run, with an empty memo to start."""
    monkeypatch.setattr(lock_mod, "_CEILINGS", type(lock_mod._CEILINGS)())
    count = {"n": 0}
    real = pressure.signal_report

    def counted(*args, **kwargs):
        count["n"] += 1
        return real(*args, **kwargs)

    monkeypatch.setattr(pressure, "signal_report", counted)
    return count


def _same(locked_db: float, fresh_db: float) -> None:
    """A lock holds its ceiling rounded down to 0.01 dB (``sheet.rounded_lock``)."""
    assert 0.0 <= fresh_db - locked_db < 0.01 + 1e-9, (locked_db, fresh_db)


def _numbers(lock):
    return (lock.ceiling_db, lock.pressure_db, lock.full_scale_db, lock.limited_by, lock.worst_hole,
            lock.worst_time_s)


def test_the_same_sound_on_the_same_rig_is_simulated_once_and_gives_the_fresh_number(rig, calls):
    sig = _signal()
    first = lock_mod.compute_lock(rig, sig)
    assert calls["n"] == 1
    again = lock_mod.compute_lock(rig, CueSignal(sig.samples.copy(), sig.rate_hz, "another name"))
    assert calls["n"] == 1  # the same samples (a copy) on an equal rig: a hit
    assert _numbers(again) == _numbers(first)
    fresh = lock_mod._ceiling_now(rig, sig.samples, sig.rate_hz)
    _same(first.ceiling_db, fresh[0].ceiling_db)
    assert first.worst_hole == fresh[1] and first.worst_time_s == pytest.approx(fresh[2], abs=5e-4)


@pytest.mark.parametrize("change", ["static", "temperature", "reserve", "one sample", "rate", "dtype"])
def test_anything_that_differs_is_a_miss(rig, calls, change):
    sig = _signal()
    base = lock_mod.compute_lock(rig, sig)
    other_rig, x, rate = rig, sig.samples, sig.rate_hz
    if change == "static":
        other_rig = rig.with_conditions(static_pa=rig.static_pa * 1.01)
    elif change == "temperature":
        other_rig = rig.with_conditions(temperature_k=rig.temperature_k + 5.0)
    elif change == "reserve":
        other_rig = rig.with_conditions(reserve=rig.reserve + 0.05)
    elif change == "one sample":
        x = x.copy()
        x[x.size // 2] *= 1.0 + 1e-12
    elif change == "rate":
        rate = 44_100
    else:
        x = x.astype(np.float32)
    other = lock_mod.compute_lock(other_rig, CueSignal(x, rate, "test"))
    assert calls["n"] >= 2  # simulated again, not read from the memo
    fresh = lock_mod._ceiling_now(other_rig, x, rate)
    _same(other.ceiling_db, fresh[0].ceiling_db)
    if change == "static":  # a higher static pressure allows more: never the old, lower number reused
        assert other.ceiling_db > base.ceiling_db


def test_two_threads_asking_at_once_simulate_once_and_a_failure_is_not_remembered(rig, monkeypatch):
    monkeypatch.setattr(lock_mod, "_CEILINGS", type(lock_mod._CEILINGS)())
    real = pressure.signal_report
    count = {"n": 0}
    fail_first = {"on": True}

    def slow(*args, **kwargs):
        count["n"] += 1
        time.sleep(0.3)  # long enough for the second thread to ask meanwhile
        if fail_first["on"]:
            fail_first["on"] = False
            raise RuntimeError("simulated failure")
        return real(*args, **kwargs)

    monkeypatch.setattr(pressure, "signal_report", slow)
    sig = _signal()
    results, errors = [], []

    def ask():
        try:
            results.append(lock_mod.compute_lock(rig, sig).ceiling_db)
        except RuntimeError as exc:
            errors.append(exc)

    threads = [threading.Thread(target=ask) for _ in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=30)
    assert not any(t.is_alive() for t in threads)  # the waiter was not left hanging
    # the first computation failed and raised in its own thread; the waiter computed it itself
    assert len(errors) == 1 and len(results) == 1 and count["n"] == 2
    fresh = lock_mod._ceiling_now(rig, sig.samples, sig.rate_hz)[0].ceiling_db
    _same(results[0], fresh)
    # and both threads asking again, together, simulate nothing more
    threads = [threading.Thread(target=ask) for _ in range(2)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=30)
    assert count["n"] == 3 and len(results) == 3  # 3: the direct fresh call above; the asks hit the memo


@settings(max_examples=4, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(order=st.lists(st.tuples(st.sampled_from([0.5, 1.5]), st.sampled_from([0.05, 0.8])),
                      min_size=2, max_size=5))
def test_any_order_of_asks_gives_each_its_own_fresh_number(rig, order):
    """Property: whatever was asked before, the memo's answer is the fresh computation of this ask."""
    lock_mod._CEILINGS.clear()
    fresh = {}
    for static_scale, amp in order:
        today = rig.with_conditions(static_pa=rig.static_pa * static_scale)
        sig = _signal(amp=amp)
        got = lock_mod.compute_lock(today, sig).ceiling_db
        key = (static_scale, amp)
        if key not in fresh:
            fresh[key] = lock_mod._ceiling_now(today, sig.samples, sig.rate_hz)[0].ceiling_db
        _same(got, fresh[key])
