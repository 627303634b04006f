"""The planned steps a stored run has no result for: the one under way when the run ended
("not finished") and those never begun ("not run").

A reader of an aborted run's record must see what was never measured, and must not take a step
for begun unless the record shows it: the run's own end says which step was under way, and for a
record without that (an older rig, a controller that died), a raw reading of the step taken on
its own does.  A reading taken ahead for it, in one query with an earlier step's reading
(``rig.read_ahead``), shares that reading's time and shows nothing.  Pure: rows in, rows out.
"""

from __future__ import annotations

from collections.abc import Collection, Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from rig.events import CUT_SHORT, NOT_RUN


@dataclass(frozen=True)
class NotMeasured:
    """A planned step with no result: its place in the plan (as a judged step's ``position``),
    its id, and ``CUT_SHORT`` or ``NOT_RUN``."""

    position: int
    step_id: str
    state: str


@dataclass(frozen=True)
class Unmeasured:
    """The steps a record lacks, in plan order, and one line for each thing it cannot tell."""

    steps: tuple[NotMeasured, ...] = ()
    notes: tuple[str, ...] = ()


def began_by_readings(
    planned: Sequence[str], step_id: str, readings: Iterable[Mapping[str, Any]]
) -> bool:
    """Whether a raw reading shows ``step_id`` was begun: one of its readings was not taken in
    the same query as a reading of a step planned before it."""
    before = set(planned[: planned.index(step_id)]) if step_id in planned else set()
    earlier_times = set()
    own_times = []
    for reading in readings:
        if reading["step_id"] == step_id:
            own_times.append(reading["taken_at"])
        elif reading["step_id"] in before:
            earlier_times.add(reading["taken_at"])
    return any(t not in earlier_times for t in own_times)


def unmeasured(
    planned: Sequence[str],
    judged: Collection[str],
    cut_short_step: str | None,
    readings: Iterable[Mapping[str, Any]],
) -> Unmeasured:
    """The planned steps with no result.  ``cut_short_step`` is what the run recorded at its end:
    the step under way, ``""`` for none, None where no end says (then the readings decide, and
    where they show nothing, every step is "not run" and a note says the first may have begun)."""
    missing = [(n, s) for n, s in enumerate(planned, start=1) if s not in judged]
    if not missing:
        return Unmeasured()
    first = missing[0][1]
    notes: tuple[str, ...] = ()
    if cut_short_step is not None:
        under_way = cut_short_step
    elif began_by_readings(planned, first, readings):
        under_way = first
    else:
        under_way = ""
        notes = (
            f"The record does not say whether step {first} was under way when the run ended, and "
            f"no reading of it was taken on its own: it is listed as {NOT_RUN}.",
        )
    steps = tuple(NotMeasured(n, s, CUT_SHORT if s == under_way else NOT_RUN) for n, s in missing)
    return Unmeasured(steps, notes)
