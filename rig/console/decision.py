"""The screen's decision on a unit as the console shows it, beside the run's verdict.

A run's verdict alone can read PASS where the unit's record says inconclusive (a simple-rule
pass within U of its limit), so the console states the decision ``rig run`` prints, from the same
rule (``rig.screening``) applied to the run's stored steps; none for a harness proof.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from typing import Any

from rig.screening import (
    CONFIRMED,
    INCONCLUSIVE,
    NO_FAULT,
    UNDECIDED,
    ScreenDecision,
    answered_no,
    is_screen,
    screen_decision,
    step_evidence,
)
from rig.store import ResultStore

DECISION_STYLES = {
    CONFIRMED: "bold red",
    NO_FAULT: "bold green",
    INCONCLUSIVE: "bold yellow",
    UNDECIDED: "bold magenta",
}
"""Colour repeats the words: the decision is always written out as well."""


def stored_decision(
    store: ResultStore, run_id: int, sequence_units: Iterable[str] = ()
) -> ScreenDecision | None:
    """The screen's decision from the run's stored row and steps, or None where the sequence
    proves or captures a harness.  ``sequence_units``: the units the sequence's steps record
    beyond the stored ones (its planned steps, or its other runs), so a proof ended before its
    proof step is still one."""
    run = store.run(run_id)
    steps = store.steps(run_id)
    if not is_screen({str(s["unit"]) for s in steps} | set(sequence_units)):
        return None
    no = answered_no((str(s["unit"]), str(s["verdict"])) for s in steps)
    verdict = None if run["verdict"] is None else str(run["verdict"])
    return screen_decision(str(run["status"]), verdict, step_evidence(steps), answered_no=no)


def run_decisions(
    store: ResultStore, runs: Iterable[Mapping[str, Any]]
) -> dict[int, ScreenDecision | None]:
    """``stored_decision`` of each run (rows of ``ResultStore.runs``) by its id, for a list of
    runs: each sequence's recorded units are read once, whatever the number of its runs."""
    units: dict[str, set[str]] = {}
    found: dict[int, ScreenDecision | None] = {}
    for run in runs:
        name = str(run["sequence_name"])
        if name not in units:
            units[name] = store.sequence_units(name)
        found[int(run["id"])] = stored_decision(store, int(run["id"]), units[name])
    return found


def decision_style(decision: ScreenDecision) -> str:
    return DECISION_STYLES.get(decision.word, "bold")
