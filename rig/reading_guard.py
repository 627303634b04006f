"""Readings that must never make a step pass, whatever a step kind computes from them.

The judge already fails a value that is NaN, infinite or an SCPI overload.  A step kind may still
compute a harmless-looking number from such a reading (a ratio with an overload in the
denominator is 0), or be handed a reading that is not what it asked for: another meter function,
a value beyond the overrange of the range it was taken on, or a reading older than the last relay
change (taken on the previous route).  The engine checks every final reading of a step here and
lets this module have the last word on the verdict.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

from rig.judge.decision import Verdict, is_no_reading
from rig.steps.base import Reading

OVERRANGE_FACTOR = 1.2
"""Bench DMMs read up to 120 % of a range before they report overload (from memory; typical of
6.5-digit bench meters, no published source claimed)."""

PASSING = (Verdict.PASS, Verdict.CONDITIONAL_PASS)


def reading_problems(
    reading: Reading,
    *,
    function: str,
    range_: float | None,
    relays_changed_at: float,
) -> list[str]:
    """Why ``reading`` is not a valid reading for the request, in words (empty when it is).

    ``function`` and ``range_`` are what was asked for (``None``: autorange); ``relays_changed_at``
    is when the relays last finished moving, on the same clock as ``reading.taken_at``.
    """
    problems = []
    if reading.function != function:
        problems.append(f"reading is of function {reading.function!r}, {function!r} was asked for")
    used = reading.range_
    if range_ is not None and used is not None and not math.isclose(used, range_, rel_tol=1e-9):
        problems.append(f"reading was taken on range {used:g}, range {range_:g} was asked for")
    if (
        used is not None
        and math.isfinite(used)
        and math.isfinite(reading.value)
        and not is_no_reading(reading.value)
        and abs(reading.value) > used * OVERRANGE_FACTOR
    ):
        problems.append(f"reading {reading.value:g} is beyond the overrange of its range {used:g}")
    if not reading.taken_at > relays_changed_at:
        problems.append("reading is older than the last relay change (taken on another route)")
    return problems


def guard_verdict(
    verdict: Verdict, readings: Sequence[Reading], problems: Sequence[str]
) -> Verdict:
    """The verdict after the guard: ``error`` for invalid readings; never a pass from a step that
    used an overload, NaN or infinite reading."""
    if problems:
        return Verdict.ERROR
    if verdict in PASSING and any(is_no_reading(r.value) for r in readings):
        return Verdict.FAIL
    return verdict
