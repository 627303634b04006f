"""Events the engine emits while a run goes on; front ends subscribe, the engine prints nothing."""

from __future__ import annotations

from dataclasses import dataclass, field

from rig.judge.decision import DecisionRule, Limits, Verdict

NOT_READINGS = frozenset({"", "faults", "nets"})
"""Units of step values that are answers and counts, not readings: an operator prompt's 1 or 0,
a harness proof's faults found, a capture's nets.  A failed one is no fault for ``rig diagnose``
to explain, and a mean, a spread or a capability of them means nothing."""


NOT_RUN = "not run"
CUT_SHORT = "not finished"
"""How a live view marks a planned step an ended run has no result for: never begun, or begun and
cut short by the run's end (its raw readings so far are stored; no step result is).  Words of a
view, not verdicts: nothing is stored for such a step."""


NONE_ALLOWED = "none allowed"


def allows_none(limits: Limits | None, unit: str) -> bool:
    """A count of faults whose limit is none (a harness proof): read as ``NONE_ALLOWED`` in
    every table, not as ``-inf .. 0``."""
    return unit == "faults" and limits is not None and limits.high == 0 and not limits.low


def prompt_answer(value: float) -> str:
    """An operator prompt's value (1 or 0) as the answer it records, for tables and records."""
    return "confirmed" if value >= 0.5 else "declined"


@dataclass(frozen=True)
class StepResult:
    """A judged step, as a front end shows it and the store keeps it."""

    position: int
    step_id: str
    kind: str
    title: str
    pins: dict[str, str]
    value: float
    unit: str
    limits: Limits | None
    predicted: float | None
    u_std: float
    expanded_u: float
    coverage_k: float
    rule: DecisionRule
    verdict: Verdict
    tur: float | None
    tur_low: bool
    readings: int
    settle_s: float
    note: str = ""
    extras: dict[str, float] = field(default_factory=dict)


@dataclass(frozen=True)
class RunStarted:
    run_id: int
    serial: str
    sequence: str
    steps: tuple[str, ...]


@dataclass(frozen=True)
class StepStarted:
    position: int
    step_id: str
    title: str
    kind: str


@dataclass(frozen=True)
class ReadingTaken:
    """A raw reading, once it is stored: every one, the judged ones and those that are not."""

    step_id: str
    role: str
    value: float
    unit: str
    settled: bool
    note: str = ""
    """Why a reading that is not judged was taken (``SETTLE_PROOF``, ``AHEAD_UNUSED``)."""


SETTLE_PROOF = "settle proof"
"""A reading that only proved the input settled: a later one agreed with it and was judged."""
AHEAD_UNUSED = "taken ahead, not used"
"""A reading taken for a later step in one query with an earlier one, never used by that step
(it failed or the run ended first); kept, flagged unsettled."""


@dataclass(frozen=True)
class StepFinished:
    result: StepResult


@dataclass(frozen=True)
class PromptShown:
    step_id: str
    text: str
    stops_run: bool = False
    """A no to this prompt ends the run (its ``declined = "stop"``): the front end says so."""


@dataclass(frozen=True)
class RunFinished:
    run_id: int
    status: str
    """complete or aborted"""
    verdict: Verdict
    reason: str
    failed_steps: tuple[str, ...]
    safe: bool
    notes: tuple[str, ...] = ()


Event = RunStarted | StepStarted | ReadingTaken | StepFinished | PromptShown | RunFinished
