"""Which steps a stored run planned, in run order, and so which of them it never measured.

A run records its planned step ids when it starts (``runs.planned_steps``).  A run recorded by an
older rig has none: its sequence file is planned again on its station, but only when the file is
the very text the run recorded (the content check of ``rig continue``); otherwise the record says
the planned steps are not known rather than guess them.
"""

from __future__ import annotations

import json
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from rig.config.station import Station
from rig.errors import RigError
from rig.unmeasured import Unmeasured, unmeasured


@dataclass(frozen=True)
class PlannedSteps:
    """The run's planned step ids (None: not known) and, when they are not the run's own
    record, one line saying where they came from or why they are not known."""

    steps: tuple[str, ...] | None
    note: str = ""


def recorded_steps(run: Mapping[str, Any]) -> tuple[str, ...] | None:
    """The list the run recorded at its start; None where it recorded none (or none readable)."""
    text = run.get("planned_steps")
    if not text:
        return None
    try:
        steps = json.loads(str(text))
    except ValueError:
        return None
    if not isinstance(steps, list) or not all(isinstance(s, str) for s in steps):
        return None
    return tuple(steps)


def _not_known(why: str) -> PlannedSteps:
    return PlannedSteps(
        None,
        f"The steps this run planned are not known: it recorded none (a run by an older rig), "
        f"and {why}; steps it never measured cannot be listed.",
    )


def from_sequence_file(run: Mapping[str, Any], station: Station | None) -> PlannedSteps:
    """The run's sequence file planned again on its station, if it is unchanged since the run."""
    from rig.config.sequence import load_sequence
    from rig.plan import build_plan
    from rig.resume import same_sequence

    path = Path(str(run["sequence_path"]))
    if station is None:
        return _not_known(f"no station file was given to plan its sequence {path} again")
    if station.name != run["station"]:
        return _not_known(
            f"it ran on station {run['station']!r}, not {station.name!r}, whose plan may differ"
        )
    try:
        sequence = load_sequence(path)
        if not same_sequence(run, sequence):
            return _not_known(f"its sequence file {path} has changed since the run")
        plan = build_plan(sequence, station)
    except RigError as exc:
        why = " ".join(str(exc).split())
        return _not_known(f"its sequence file cannot be planned again ({why})")
    return PlannedSteps(
        tuple(p.spec.id for p in plan.steps),
        f"This run recorded no list of its planned steps (a run by an older rig): they are those "
        f"of its sequence file {path}, unchanged since the run (same SHA-256), planned again on "
        f"station {station.name!r}.",
    )


def planned_steps(run: Mapping[str, Any], station: Station | None) -> PlannedSteps:
    """The run's own list, else its unchanged sequence file's, else why neither can be had."""
    recorded = recorded_steps(run)
    if recorded is not None:
        return PlannedSteps(recorded)
    return from_sequence_file(run, station)


def unmeasured_steps(
    run: Mapping[str, Any],
    steps: Sequence[Mapping[str, Any]],
    readings: Sequence[Mapping[str, Any]],
    station: Station | None,
) -> Unmeasured:
    """The planned steps a run that ended before completing has no result for, with what the
    record cannot tell.  A complete run measured every step; a running one has not ended."""
    if run["status"] in ("complete", "running"):
        return Unmeasured()
    known = planned_steps(run, station)
    if known.steps is None:
        return Unmeasured(notes=(known.note,))
    judged = {str(s["step_id"]) for s in steps}
    found = unmeasured(known.steps, judged, run.get("cut_short_step"), readings)
    notes = (known.note, *found.notes) if known.note else found.notes
    return Unmeasured(found.steps, notes)
