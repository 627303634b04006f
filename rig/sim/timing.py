"""Instant or real timing for the virtual bench.

In ``instant`` timing nothing waits (tests); in ``real`` timing relays take their operate and
release time and readings their integration time, so the controller can be measured against
the physical limit of the instruments.
"""

from __future__ import annotations

import enum
import threading
import time

from rig.deadline import wait_until


class Timing(enum.Enum):
    INSTANT = "instant"
    REAL = "real"


class BenchClock:
    """Waits as the chosen timing says; also tells the bench's notion of now."""

    def __init__(self, timing: Timing = Timing.INSTANT) -> None:
        self.timing = timing
        self._lock = threading.Lock()
        self._spent_s = 0.0
        self._charged_s = 0.0

    def mark(self) -> float:
        """A start time for ``wait(..., since=mark)``."""
        return time.perf_counter()

    def wait(self, seconds: float, *, since: float | None = None) -> None:
        """Spend ``seconds`` of instrument time (nothing in instant timing).  With ``since`` (a
        ``mark()``), the time already gone since then counts: the simulator's own computing
        overlaps the instrument time instead of adding to it."""
        with self._lock:
            self._charged_s += max(0.0, seconds)
        if self.timing is not Timing.REAL:
            return
        start = time.perf_counter() if since is None else since
        # an instrument's own timer does not oversleep as ``time.sleep`` does
        wait_until(start + seconds, time.perf_counter)
        if seconds > 0 or since is not None:
            with self._lock:
                self._spent_s += time.perf_counter() - start

    @property
    def spent_s(self) -> float:
        """Instrument time spent so far (slept, as measured), so a benchmark can tell the
        controller's own time apart: wall time minus this."""
        with self._lock:
            return self._spent_s

    @property
    def charged_s(self) -> float:
        """Instrument time the simulated instruments have charged so far, by their own figures
        (relay times, integrations, autorange), however late the host woke them: what the
        physical limit must account for, whatever the timing."""
        with self._lock:
            return self._charged_s

    def now(self) -> float:
        """Monotonic seconds; settling after a relay change is computed against this."""
        return time.monotonic()

    @property
    def instant(self) -> bool:
        return self.timing is Timing.INSTANT
