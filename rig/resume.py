"""Continuing a run that a stopped controller left unfinished, from its next step.

A run is recorded step by step, each step result in its own committed transaction, so after a
crash the store says exactly which steps are done.  Continuing runs the plan's remaining steps in
the same run record: no finished step is measured twice, and a step that was cut short is measured
again (its earlier raw readings stay in the store; nothing measured is thrown away).  Continuing is
refused when the sequence file changed since the run began, because the remaining steps would
then no longer belong to the same test.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

from rig.config.sequence import Sequence
from rig.errors import RigError
from rig.events import StepResult
from rig.judge.decision import DecisionRule, Limits, Verdict
from rig.plan import Plan
from rig.store import ResultStore

INCOMPLETE_REASON = "the controller stopped before the run ended (no end was recorded)"


class ResumeRefused(RigError):
    """The run cannot be continued: it is not incomplete, or its sequence changed."""


@dataclass(frozen=True)
class Continuation:
    """What is needed to carry on: the run's own header and the steps already done."""

    run_id: int
    serial: str
    operator: str
    unit: str
    faults: tuple[str, ...]
    done: dict[str, StepResult]


def abandoned_notes(run_ids: list[int]) -> list[str]:
    return [
        f"run {run_id} was left unfinished by a controller that stopped; it is marked incomplete"
        for run_id in run_ids
    ]


def same_sequence(run: Mapping[str, Any], sequence: Sequence) -> bool:
    """Whether ``sequence`` is the very text the run recorded (its SHA-256): only then do the
    run's steps and the file's belong to one test (to continue it, or to read its plan again)."""
    return str(run["sequence_hash"]) == sequence.content_hash


ENDED = ("complete", "aborted")
"""Statuses of a run that ended, recorded as such: nothing of it is left to continue."""


def not_incomplete(run_id: int, status: str, where: object) -> str:
    """Why a run of ``status`` (not ``incomplete``) cannot be continued, in words."""
    again = "; test the unit again with a new run (rig run)" if status in ENDED else ""
    return (
        f"run {run_id} in {where} is {status}, not incomplete; only a run a stopped controller "
        f"left unfinished can be continued{again}"
    )


def continuation(store: ResultStore, run_id: int, plan: Plan) -> Continuation:
    """Check that ``run_id`` can be continued with ``plan`` and load what it has done."""
    run = store.run(run_id)
    if run["status"] != "incomplete":
        raise ResumeRefused(not_incomplete(run_id, str(run["status"]), store.path))
    if run["station"] != plan.station.name:
        raise ResumeRefused(
            f"run {run_id} ran on station {run['station']!r}; this station is {plan.station.name!r}"
        )
    if not same_sequence(run, plan.sequence):
        raise ResumeRefused(
            f"the sequence {plan.sequence.path} changed since run {run_id} began "
            "(its content hash differs); start a new run instead"
        )
    planned = {p.spec.id for p in plan.steps}
    done = {}
    for row in store.steps(run_id):
        if row["step_id"] not in planned:
            raise ResumeRefused(
                f"run {run_id} has a result for step {row['step_id']!r}, which the plan lacks"
            )
        done[row["step_id"]] = step_result_from_row(row)
    return Continuation(
        run_id,
        str(run["serial"]),
        str(run["operator"]),
        str(run["unit"]),
        tuple(json.loads(run["faults"] or "[]")),
        done,
    )


def _float(value: Any) -> float:
    return math.nan if value is None else float(value)


def step_result_from_row(row: dict[str, Any]) -> StepResult:
    """A stored step as the engine's result (pins are not stored; later steps need only the
    value and its uncertainty)."""
    low, high = row["low"], row["high"]
    limits = None if low is None and high is None else Limits(low, high)
    extras = json.loads(row["extras"] or "{}")
    return StepResult(
        position=int(row["position"]),
        step_id=str(row["step_id"]),
        kind=str(row["kind"]),
        title=str(row["title"]),
        pins={},
        value=_float(row["value"]),
        unit=str(row["unit"]),
        limits=limits,
        predicted=row["predicted"],
        u_std=_float(row["u_std"]),
        expanded_u=_float(row["expanded_u"]),
        coverage_k=float(row["coverage_k"]),
        rule=DecisionRule(row["decision_rule"]),
        verdict=Verdict(row["verdict"]),
        tur=row["tur"],
        tur_low=False,
        readings=0,
        settle_s=float(row["settle_s"]),
        note=str(row["note"]),
        extras={k: float(v) for k, v in extras.items() if isinstance(v, int | float)},
    )
