"""The decision a returned-unit screen reaches on a unit: one rule for one run's record
(``rig run``, ``rig report``) and for the shop's tally over the last runs (``rig stats``).

For a screen a fail confirms the fault and a pass finds none only where the reading lies beyond
its expanded uncertainty U from the limit (ILAC-G8:09/2019).  The run's verdict alone cannot say
so: under the simple rule a reading within U of a limit is a plain pass or fail.  So the decision
is taken from each judged step's value, limits and U (``evidence``): a fault is confirmed by a
step that fails by more than its U beyond a limit (or reads nothing: an open circuit); no fault
is found only where every judged step lies inside its limits by more than its U.  A step with no
U (none known, or 0) backs neither: its run is inconclusive.  Anything else that completed is
inconclusive.  A run that did not complete, could not measure, had a question answered no, or
whose bench reference (a ``reference-temperature`` step) failed decides nothing.  Pure.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass

from rig.end_cause import EndCause
from rig.judge.decision import SCPI_OVERLOAD, Limits, is_no_reading
from rig.quantity import format_quantity

CONFIRMED = "confirmed failure"
NO_FAULT = "no fault found"
INCONCLUSIVE = "inconclusive"
UNDECIDED = "undecided"

MEANINGS = {
    CONFIRMED: "a fail beyond the uncertainty of the reading: the unit's fault is confirmed",
    NO_FAULT: "a pass beyond the uncertainty of the reading: the unit shows no fault",
    INCONCLUSIVE: (
        "a reading within the uncertainty of a limit: retest, or measure with a smaller uncertainty"
    ),
    UNDECIDED: "the run did not complete, or a step could not measure: run the unit again",
}
NO_U_MEANING = (
    "a step was judged with no uncertainty, so its reading cannot be shown beyond the "
    "uncertainty of its limit: state the meter's accuracy for it in the station file, and run "
    "the unit again"
)
"""The meaning of ``INCONCLUSIVE`` where a step without an uncertainty kept the run from a
decision (and no reading lies within U of a limit)."""
REFERENCE_FAILED_MEANING = (
    "the bench's reference failed (a reference-temperature step outside its limits): the "
    "steps judged at its temperature could not be judged; put the bench right, and run the "
    "unit again"
)
"""The meaning of ``UNDECIDED`` for a run that went to its end with its bench reference failed."""
ANSWERED_NO_MEANING = (
    "an operator answered no to a question of the sequence: the readings do not decide; settle "
    "what it asked, and run the unit again"
)
"""The meaning of ``UNDECIDED`` for a run that went to its end with a question answered no."""
ANSWER_UNIT = ""
"""The unit a prompt's step records (its answer, 1 or 0): a failed one is an operator's no."""

REFERENCE_KIND = "reference-temperature"
"""The kind of the bench's own reference step: its limits state where the sequence holds, not a
property of the unit, so it is no evidence on the unit; failed, it leaves the run undecided."""
_FAILED = frozenset({"fail", "conditional fail", "error"})
_JUDGED = frozenset({"pass", "conditional pass", "conditional fail", "fail"})
_PASSED = frozenset({"pass", "conditional pass"})

HARNESS_UNITS = frozenset({"faults", "nets"})
"""The units of a harness proof's step (the faults it found) and of a capture's (the nets it
found): a sequence with one proves or records a harness, it screens no returned unit."""


@dataclass(frozen=True)
class ScreenDecision:
    word: str
    meaning: str


@dataclass(frozen=True)
class StepEvidence:
    """One step as the screen weighs it: what the store keeps of it."""

    kind: str
    unit: str
    value: float | None
    """None (or NaN, inf, overload) where nothing was read."""
    low: float | None
    high: float | None
    expanded_u: float | None
    """None (or NaN) where unknown."""
    verdict: str
    step_id: str = ""


@dataclass(frozen=True)
class Evidence:
    """What a run's steps show the screen, beyond the run's verdict."""

    confirmed: bool = False
    """A step of the unit failed by more than its U beyond a limit, or read nothing."""
    clear: bool = True
    """Every judged step of the unit lies inside its limits by more than its U."""
    reference_failed: bool = False
    """A bench reference step failed (or could not measure)."""
    without_u: bool = False
    """A judged step of the unit had no U (it can back neither side), and none that kept the
    run from a decision had one: the want of a U alone left the run inconclusive."""
    near: str = ""
    """The first step of the unit read within its U of a limit, with its margin and U, in
    words: what a reviewer of an inconclusive run looks for first."""


def _no_reading(value: float | None) -> bool:
    return value is None or is_no_reading(value)


def _has_u(u: float | None) -> bool:
    return u is not None and math.isfinite(u) and u > 0.0


def _margin(step: StepEvidence) -> float | None:
    """Distance from the value to the nearer limit, positive inside (None: no limits)."""
    assert step.value is not None
    if step.low is None and step.high is None:
        return None
    return Limits(step.low, step.high).margin(step.value)


def _of_unit(step: StepEvidence) -> bool:
    """A step that reads the unit: not a prompt's answer, not a harness's, not the bench's
    reference."""
    return step.unit not in {ANSWER_UNIT, *HARNESS_UNITS} and step.kind != REFERENCE_KIND


def _beyond_u(step: StepEvidence, *, outside: bool) -> bool:
    """Whether the step lies outside (or inside) its limits by more than its U."""
    if _no_reading(step.value) or not _has_u(step.expanded_u):
        return False
    margin = _margin(step)
    assert step.expanded_u is not None
    if margin is None:
        return False
    return margin < -step.expanded_u if outside else margin > step.expanded_u


def evidence(steps: Iterable[StepEvidence]) -> Evidence:
    """What a run's steps show the screen (the rule ``EVIDENCE_SQL`` states for the store).
    The decision rule is not needed: beyond U from a limit, both rules give the same verdict."""
    confirmed, clear, reference_failed = False, True, False
    unclear_u: set[bool] = set()  # whether each step that kept the run from "clear" had a U
    near = ""
    for step in steps:
        if step.kind == REFERENCE_KIND and step.verdict in _FAILED:
            reference_failed = True
        if not _of_unit(step):
            continue
        if step.verdict == "fail" and (_no_reading(step.value) or _beyond_u(step, outside=True)):
            confirmed = True
        judged = step.verdict in _JUDGED and (step.low is not None or step.high is not None)
        if judged and not (step.verdict == "pass" and _beyond_u(step, outside=False)):
            clear = False
            unclear_u.add(_has_u(step.expanded_u))
            near = near or _within_u_text(step)
    return Evidence(confirmed, clear, reference_failed, unclear_u == {False}, near)


def _within_u_text(step: StepEvidence) -> str:
    """``step`` read within its U of a limit, in words (empty where it was not)."""
    if _no_reading(step.value) or not _has_u(step.expanded_u):
        return ""
    margin = _margin(step)
    assert step.expanded_u is not None
    if margin is None or abs(margin) > step.expanded_u:
        return ""
    side = "inside" if margin >= 0 else "outside"
    return (
        f"{step.step_id or step.kind} reads {format_quantity(abs(margin), step.unit)} {side} its "
        f"nearer limit, within its U of {format_quantity(step.expanded_u, step.unit)}"
    )


_NOT_OF_UNIT = ", ".join(f"'{unit}'" for unit in (ANSWER_UNIT, *sorted(HARNESS_UNITS)))
_STEP_OF_UNIT = (
    f"s.run_id = r.id AND s.unit NOT IN ({_NOT_OF_UNIT}) AND s.kind <> '{REFERENCE_KIND}'"
)
_HAS_U = "(s.expanded_u IS NOT NULL AND s.expanded_u > 0)"
_READ = f"(s.value IS NOT NULL AND ABS(s.value) < {SCPI_OVERLOAD!r})"
_MARGIN = (
    "(CASE WHEN s.low IS NULL THEN s.high - s.value WHEN s.high IS NULL THEN s.value - s.low"
    " WHEN s.value - s.low < s.high - s.value THEN s.value - s.low ELSE s.high - s.value END)"
)
EVIDENCE_SQL = {
    "confirmed": (
        f"CASE WHEN EXISTS (SELECT 1 FROM steps s WHERE {_STEP_OF_UNIT} AND s.verdict = 'fail'"
        f" AND (NOT {_READ} OR ({_HAS_U} AND {_MARGIN} < -s.expanded_u))) THEN 1 ELSE 0 END"
    ),
    "clear": (
        f"CASE WHEN EXISTS (SELECT 1 FROM steps s WHERE {_STEP_OF_UNIT}"
        " AND s.verdict IN ('pass', 'conditional pass', 'conditional fail', 'fail')"
        " AND (s.low IS NOT NULL OR s.high IS NOT NULL)"
        f" AND CASE WHEN s.verdict = 'pass' AND {_READ} AND {_HAS_U}"
        f" AND {_MARGIN} > s.expanded_u THEN 0 ELSE 1 END = 1) THEN 0 ELSE 1 END"
    ),
    "reference_failed": (
        "CASE WHEN EXISTS (SELECT 1 FROM steps s WHERE s.run_id = r.id"
        f" AND s.kind = '{REFERENCE_KIND}'"
        " AND s.verdict IN ('fail', 'conditional fail', 'error')) THEN 1 ELSE 0 END"
    ),
}
"""``evidence`` as SQL over a run ``r`` (0 or 1 each), for the store's tallies, which never
pass a step through Python; portable SQL.  ``tests/test_screen_evidence.py`` holds the two
to the same answers."""


def stored_evidence(confirmed: object, clear: object, reference_failed: object) -> Evidence:
    """``Evidence`` from the columns ``EVIDENCE_SQL`` gives (``without_u`` is not among them:
    it words a run's record only)."""
    return Evidence(bool(confirmed), bool(clear), bool(reference_failed))


def step_evidence(rows: Iterable[Mapping[str, object]]) -> Evidence:
    """``evidence`` of a run's stored steps (``ResultStore.steps``)."""
    return evidence(
        StepEvidence(
            str(r["kind"]),
            str(r["unit"]),
            _number(r["value"]),
            _number(r["low"]),
            _number(r["high"]),
            _number(r["expanded_u"]),
            str(r["verdict"]),
            str(r["step_id"]),
        )
        for r in rows
    )


def _number(value: object) -> float | None:
    return None if value is None else float(value)  # type: ignore[arg-type]


def decision_word(
    status: str, verdict: str | None, found: Evidence, *, answered_no: bool = False
) -> str:
    """The screen's decision on a unit from the status and verdict of its run and what its
    steps show (``evidence``).  A run in which an operator answered no (``answered_no``: a
    prompt's step failed) decides nothing: the question set the unit up or asked what the
    bench cannot see, and a no may have failed the run, or left its readings meaningless.  Nor
    does one whose bench reference failed: what was judged at its temperature is not known."""
    if status != "complete" or answered_no or verdict not in _JUDGED or found.reference_failed:
        return UNDECIDED
    if found.confirmed:
        return CONFIRMED
    if found.clear and verdict in _PASSED:  # conditional only by a step not of the unit
        return NO_FAULT
    return INCONCLUSIVE


def screen_decision(
    status: str, verdict: str | None, found: Evidence, *, answered_no: bool = False
) -> ScreenDecision:
    """``decision_word`` with its one-line meaning, for a run's record."""
    word = decision_word(status, verdict, found, answered_no=answered_no)
    if word == UNDECIDED and status == "complete":
        if answered_no:
            return ScreenDecision(word, ANSWERED_NO_MEANING)
        if found.reference_failed:
            return ScreenDecision(word, REFERENCE_FAILED_MEANING)
    if word == INCONCLUSIVE and found.without_u:
        return ScreenDecision(word, NO_U_MEANING)
    if word == INCONCLUSIVE and found.near:
        return ScreenDecision(word, f"{found.near}: retest, or measure with a smaller uncertainty")
    return ScreenDecision(word, MEANINGS[word])


def decision_line(decision: ScreenDecision) -> str:
    """The decision as ``rig run`` prints it under the verdict, and the console beside it."""
    return f"screen decision: {decision.word} ({decision.meaning})"


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
REFERENCE_FAILED = "the bench's reference failed"
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
    status: str,
    reason: str,
    code: str | None = None,
    *,
    answered_no: bool = False,
    reference_failed: bool = False,
) -> str:
    """Why an undecided run decided nothing, in a few words: a QA tally keeps these runs apart
    from the part failures, since they say nothing about the part.  ``code`` is the cause stored
    with the run (``rig.end_cause``); None for a run recorded before schema 6, read from the
    start of its reason instead.  ``answered_no``: an operator answered a question no;
    ``reference_failed``: a bench reference step failed (``Evidence``)."""
    if status == "complete" and answered_no:
        return ANSWERED_NO
    if status == "complete" and reference_failed:
        return REFERENCE_FAILED
    if status == "incomplete":
        return CONTROLLER_STOPPED
    if status == "running":
        return UNDER_WAY
    if code is not None:
        return _CAUSE_BY_CODE.get(code, OTHER)
    return next((cause for start, cause in _CAUSE_BY_REASON if reason.startswith(start)), OTHER)
