"""Waiting until a deadline without oversleeping it.

``time.sleep`` wakes about 0.1 ms late here (0.25-0.4 ms at worst, measured), which on a wait of a
few milliseconds is several per cent.  Sleeping to within ``SPIN_S`` of the deadline and then
yielding until it comes ends the wait on time, at the cost of a fraction of a millisecond of CPU.
The yield is ``os.sched_yield`` (it lets go of the interpreter lock and the CPU, and is back in
microseconds), not ``time.sleep(0)``: that one is a timed sleep of its own, 85 us here (the
kernel's timer slack), so a wait ended up to that late.
"""

from __future__ import annotations

import os
import time
from collections.abc import Callable

SPIN_S = 0.0003
"""The last part of a wait spent yielding (``os.sched_yield``) instead of sleeping."""


def wait_until(
    deadline: float,
    clock: Callable[[], float] = time.monotonic,
    *,
    check: Callable[[], None] | None = None,
    slice_s: float = 0.05,
) -> None:
    """Return once ``clock()`` has reached ``deadline``.  ``check`` (which may raise to end the
    wait early) is called before every sleep, so at least every ``slice_s``."""
    while (left := deadline - clock()) > 0:
        if check is not None:
            check()
        if left > SPIN_S:
            time.sleep(min(left - SPIN_S, slice_s))
        else:
            os.sched_yield()  # gives up the GIL and the CPU each turn, so others run meanwhile
