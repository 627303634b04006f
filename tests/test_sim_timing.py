"""The virtual bench's clock in real timing: a wait is never shorter than asked, and time the
simulator already spent computing (since a mark) counts toward it instead of adding to it."""

from __future__ import annotations

import time

import pytest

from rig.sim import timing
from rig.sim.timing import BenchClock, Timing


def test_a_wait_lasts_at_least_its_time_and_is_counted() -> None:
    clock = BenchClock(Timing.REAL)
    start = time.perf_counter()
    clock.wait(0.02)
    assert time.perf_counter() - start >= 0.02  # a floor: lateness is allowed, earliness not
    assert clock.spent_s >= 0.02


def test_time_spent_since_the_mark_is_not_slept_again(monkeypatch: pytest.MonkeyPatch) -> None:
    clock = BenchClock(Timing.REAL)
    mark = clock.mark()
    time.sleep(0.03)  # the simulator "computing" for 30 ms
    slept: list[float] = []
    monkeypatch.setattr(timing.time, "sleep", lambda s: slept.append(s))
    clock.wait(0.02, since=mark)  # 20 ms asked, 30 ms already gone: nothing more to wait
    assert [s for s in slept if s > 0] == []
    assert clock.spent_s >= 0.03  # all of it was instrument time


def test_instant_timing_never_waits(monkeypatch: pytest.MonkeyPatch) -> None:
    clock = BenchClock(Timing.INSTANT)
    slept: list[float] = []
    monkeypatch.setattr(timing.time, "sleep", lambda s: slept.append(s))
    clock.wait(5.0)
    assert slept == [] and clock.spent_s == 0.0
