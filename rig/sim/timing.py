"""Instant or real timing for the virtual bench.

In ``instant`` timing nothing waits (tests); in ``real`` timing relays take their operate and
release time and readings their integration time, so the controller can be measured against
the physical limit of the instruments.
"""

from __future__ import annotations

import enum
import threading
import time


class Timing(enum.Enum):
    INSTANT = "instant"
    REAL = "real"


class BenchClock:
    """Waits as the chosen timing says; also tells the bench's notion of now."""

    def __init__(self, timing: Timing = Timing.INSTANT) -> None:
        self.timing = timing
        self._lock = threading.Lock()
        self._spent_s = 0.0

    def wait(self, seconds: float) -> None:
        """Spend ``seconds`` of instrument time (nothing in instant timing)."""
        if self.timing is Timing.REAL and seconds > 0:
            start = time.perf_counter()
            time.sleep(seconds)
            with self._lock:
                self._spent_s += time.perf_counter() - start

    @property
    def spent_s(self) -> float:
        """Instrument time spent so far (slept, as measured), so a benchmark can tell the
        controller's own time apart: wall time minus this."""
        with self._lock:
            return self._spent_s

    def now(self) -> float:
        """Monotonic seconds; settling after a relay change is computed against this."""
        return time.monotonic()

    @property
    def instant(self) -> bool:
        return self.timing is Timing.INSTANT
