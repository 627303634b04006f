"""The decision a returned-unit screen reaches on a unit: one rule for one run's record
(``rig run``, ``rig report``) and for the shop's tally over the last runs (``rig stats``).

For a screen a fail confirms the fault and a pass finds none: each lies beyond the
measurement's uncertainty from its limit.  A conditional pass or fail lies within it
(ILAC-G8:09/2019): neither can be defended to a customer as a decision, so the unit is
inconclusive.  A run that did not complete, or could not measure, decides nothing.  Pure.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

from rig.end_cause import EndCause

CONFIRMED = "confirmed failure"
NO_FAULT = "no fault found"
INCONCLUSIVE = "inconclusive"
UNDECIDED = "undecided"

MEANINGS = {
    CONFIRMED: "a fail beyond the uncertainty of the reading: the unit's fault is confirmed",
    NO_FAULT: "a pass beyond the uncertainty of the reading: the unit shows no fault",
    INCONCLUSIVE: (
        "a reading within the uncertainty of a limit (a conditional verdict): retest, or "
        "measure with a smaller uncertainty"
    ),
    UNDECIDED: "the run did not complete, or a step could not measure: run the unit again",
}
ANSWERED_NO_MEANING = (
    "an operator answered no to a question of the sequence: the readings do not decide; settle "
    "what it asked, and run the unit again"
)
"""The meaning of ``UNDECIDED`` for a run that went to its end with a question answered no."""
ANSWER_UNIT = ""
"""The unit a prompt's step records (its answer, 1 or 0): a failed one is an operator's no."""

_BY_VERDICT = {
    "fail": CONFIRMED,
    "pass": NO_FAULT,
    "conditional pass": INCONCLUSIVE,
    "conditional fail": INCONCLUSIVE,
}

HARNESS_UNITS = frozenset({"faults", "nets"})
"""The units of a harness proof's step (the faults it found) and of a capture's (the nets it
found): a sequence with one proves or records a harness, it screens no returned unit."""


@dataclass(frozen=True)
class ScreenDecision:
    word: str
    meaning: str


def decision_word(status: str, verdict: str | None, *, answered_no: bool = False) -> str:
    """The screen's decision on a unit from the status and verdict of its run.  A run in which
    an operator answered no (``answered_no``: a prompt's step failed) decides nothing: the
    question set the unit up or asked what the bench cannot see, and a no may have failed the
    run, or left its readings meaningless."""
    if status != "complete" or answered_no:
        return UNDECIDED
    return _BY_VERDICT.get(verdict or "", UNDECIDED)


def screen_decision(
    status: str, verdict: str | None, *, answered_no: bool = False
) -> ScreenDecision:
    """``decision_word`` with its one-line meaning, for a run's record."""
    word = decision_word(status, verdict, answered_no=answered_no)
    if word == UNDECIDED and answered_no and status == "complete":
        return ScreenDecision(word, ANSWERED_NO_MEANING)
    return ScreenDecision(word, MEANINGS[word])


def answered_no(steps: Iterable[tuple[str, str]]) -> bool:
    """Whether an operator answered no in a run, from its steps' (unit, verdict)."""
    return any(unit == ANSWER_UNIT and verdict == "fail" for unit, verdict in steps)


def is_screen(step_units: Iterable[str]) -> bool:
    """Whether a sequence whose steps record these units screens returned units: every
    sequence does but a harness proof or capture."""
    return HARNESS_UNITS.isdisjoint(step_units)


STOPPED = "stopped by the operator"
NO_ANSWER = "a question got no answer"
INSTRUMENT = "instrument fault"
STEP_ENDED = "a step could not measure, or ended the run"
ANSWERED_NO = "an operator answered no"
CONFIGURATION = "a sequence or station setting to correct"
CONTROLLER_STOPPED = "the controller stopped mid-run"
UNDER_WAY = "still running, or its controller stopped"
OTHER = "other (see the run's reason)"

_CAUSE_BY_CODE: dict[str, str] = {
    EndCause.OPERATOR_STOP: STOPPED,
    EndCause.NO_ANSWER: NO_ANSWER,
    EndCause.DECLINED: ANSWERED_NO,
    EndCause.INSTRUMENT: INSTRUMENT,
    EndCause.STEP_ERROR: STEP_ENDED,
    EndCause.CONFIGURATION: CONFIGURATION,
    EndCause.CONTROLLER_STOPPED: CONTROLLER_STOPPED,
}
"""The cause stored with a run (schema 6) -> why it decided nothing; any other code is OTHER."""

_CAUSE_BY_REASON = (
    ("stopped by the operator", STOPPED),
    ("interrupted", STOPPED),
    ("the prompt ", NO_ANSWER),
    ("instrument fault", INSTRUMENT),
    ("step ", STEP_ENDED),
)
"""The start of a run's recorded reason (as ``rig.engine`` words it) -> why it decided nothing:
for runs recorded before schema 6, which stored no cause."""


def undecided_cause(
    status: str, reason: str, code: str | None = None, *, answered_no: bool = False
) -> str:
    """Why an undecided run decided nothing, in a few words: a QA tally keeps these runs apart
    from the part failures, since they say nothing about the part.  ``code`` is the cause stored
    with the run (``rig.end_cause``); None for a run recorded before schema 6, read from the
    start of its reason instead.  ``answered_no``: an operator answered a question no."""
    if status == "complete" and answered_no:
        return ANSWERED_NO
    if status == "incomplete":
        return CONTROLLER_STOPPED
    if status == "running":
        return UNDER_WAY
    if code is not None:
        return _CAUSE_BY_CODE.get(code, OTHER)
    return next((cause for start, cause in _CAUSE_BY_REASON if reason.startswith(start)), OTHER)
