"""Waiting until a deadline (rig.deadline): never before it, and a check that can end the wait.

How late a wait ends depends on the machine, so it is measured by the throughput benchmark, not
asserted here."""

from __future__ import annotations

import time

import pytest

from rig.deadline import SPIN_S, wait_until


class Stopped(Exception):
    pass


@pytest.mark.parametrize("seconds", [0.0, SPIN_S / 2, 0.002, 0.02])
def test_the_wait_never_ends_before_its_deadline(seconds: float) -> None:
    deadline = time.monotonic() + seconds
    wait_until(deadline)
    assert time.monotonic() >= deadline


def test_a_deadline_already_past_returns_without_checking() -> None:
    def check() -> None:
        raise AssertionError("no wait, so nothing to check")

    wait_until(time.monotonic() - 1.0, check=check)


def test_the_check_runs_at_least_every_slice_and_may_end_the_wait() -> None:
    calls: list[float] = []

    def check() -> None:
        calls.append(time.monotonic())
        if len(calls) == 3:
            raise Stopped

    started = time.monotonic()
    with pytest.raises(Stopped):
        wait_until(started + 60.0, check=check, slice_s=0.01)
    assert len(calls) == 3
    assert calls[-1] - started < 30.0  # slices of 10 ms, not the minute asked for


def test_another_clock_can_be_used() -> None:
    deadline = time.perf_counter() + 0.003
    wait_until(deadline, time.perf_counter)
    assert time.perf_counter() >= deadline
