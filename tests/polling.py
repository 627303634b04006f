"""Waiting in tests for something another thread or process will do."""

from __future__ import annotations

import time
from collections.abc import Callable


def wait_for(condition: Callable[[], bool], limit_s: float = 5.0) -> bool:
    """Poll until ``condition`` holds; the limit is generous, only a hang makes it fail."""
    deadline = time.monotonic() + limit_s
    while time.monotonic() < deadline:
        if condition():
            return True
        time.sleep(0.001)
    return condition()
