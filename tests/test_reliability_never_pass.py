"""Readings that must never pass: overload, NaN, infinities, a wrong function or range, and a
reading older than the last relay change.  The property goes through the engine's own judging
(``judge_outcome``) and its reading guard, with the step value either the bad reading itself or a
harmless-looking number a step kind might compute from it, inside the limits."""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rig.judge.decision import DecisionRule, Limits, Verdict
from rig.reading_guard import OVERRANGE_FACTOR, guard_verdict, reading_problems
from rig.step_judging import judge_outcome
from rig.steps.base import Outcome, Reading, StepSpec

# SCPI-1999: 9.9E37 is overload (+infinity), -9.9E37 negative infinity, 9.91E37 not a number;
# FIELD-NOTES: |x| >= 9.9E37 is no reading at all.
NO_READINGS = [9.9e37, -9.9e37, 9.91e37, 1e38, math.inf, -math.inf, math.nan]
FUNCTIONS = ["dcv", "res2w", "res4w", "dci"]
RANGES = [0.1, 1.0, 10.0, 100.0, 1e3, 1e4, 1e6]
DEFECTS = ["no-reading", "wrong-function", "wrong-range", "beyond-overrange", "stale"]

finite = st.floats(min_value=-1e6, max_value=1e6, allow_nan=False)


@st.composite
def bad_cases(draw: st.DrawFn) -> tuple[str, Reading, str, float | None, float]:
    """(defect, reading, function asked, range asked, relays changed at)."""
    defect = draw(st.sampled_from(DEFECTS))
    function = draw(st.sampled_from(FUNCTIONS))
    range_ = draw(st.sampled_from(RANGES))
    asked_range: float | None = draw(st.one_of(st.none(), st.just(range_)))
    changed_at = draw(st.floats(min_value=1e9, max_value=2e9))
    taken_at = changed_at + draw(st.floats(min_value=1e-6, max_value=10.0))
    value = draw(st.floats(min_value=-range_, max_value=range_))
    got_function, got_range = function, range_
    if defect == "no-reading":
        value = draw(st.sampled_from(NO_READINGS))
    elif defect == "wrong-function":
        got_function = draw(st.sampled_from([f for f in FUNCTIONS if f != function]))
    elif defect == "wrong-range":
        asked_range = range_
        got_range = draw(st.sampled_from([r for r in RANGES if r != range_]))
    elif defect == "beyond-overrange":
        value = math.copysign(
            range_ * OVERRANGE_FACTOR * draw(st.floats(min_value=1.0001, max_value=1e6)),
            draw(st.sampled_from([1.0, -1.0])),
        )
    else:  # stale: taken before (or exactly when) the relays last moved
        taken_at = changed_at - draw(st.floats(min_value=0.0, max_value=10.0))
    reading = Reading("hi-lo", got_function, value, got_range, 1.0, taken_at, 1e-6)
    return defect, reading, function, asked_range, changed_at


limits_strategy = st.one_of(
    st.none(),
    st.tuples(finite, st.floats(min_value=0.0, max_value=1e6)).map(
        lambda t: Limits(t[0] - t[1], t[0] + t[1])
    ),
    finite.map(lambda x: Limits(None, x)),
    finite.map(lambda x: Limits(x, None)),
)


@pytest.mark.timeout(600)
@settings(max_examples=1000, deadline=None, derandomize=True, database=None)
@given(
    bad_cases(),
    limits_strategy,
    st.floats(min_value=0.0, max_value=1e3),
    st.sampled_from(list(DecisionRule)),
    st.booleans(),
)
def test_bad_readings_never_pass(
    case: tuple[str, Reading, str, float | None, float],
    limits: Limits | None,
    u_std: float,
    rule: DecisionRule,
    derived: bool,
) -> None:
    defect, reading, function, asked_range, changed_at = case
    if derived and limits is not None:  # the worst a step could compute: a value in the limits
        inside = [x for x in (limits.low, limits.high) if x is not None]
        value = sum(inside) / len(inside)
    else:
        value = reading.value
    spec = StepSpec("step", "volts", "", "steps[0]", limits=limits, rule=rule)
    outcome = Outcome(value, "V", u_std, limits, [reading])
    verdict, _, _ = judge_outcome(spec, outcome, error=False)
    problems = reading_problems(
        reading, function=function, range_=asked_range, relays_changed_at=changed_at
    )
    final = guard_verdict(verdict, [reading], problems)
    assert final not in (Verdict.PASS, Verdict.CONDITIONAL_PASS), (defect, reading, final)
    if defect != "no-reading":
        assert problems, defect  # the guard said why, in words, for the record


@settings(max_examples=500, deadline=None, derandomize=True, database=None)
@given(st.sampled_from(FUNCTIONS), st.sampled_from(RANGES), st.floats(0.0, 1.0))
def test_a_good_reading_is_not_flagged(function: str, range_: float, share: float) -> None:
    """The guard is not a blanket refusal: a valid reading on its range, after the relays moved,
    is judged by the limits alone."""
    reading = Reading("hi-lo", function, share * range_, range_, 1.0, 2.0, 1e-6)
    assert reading_problems(reading, function=function, range_=range_, relays_changed_at=1.0) == []
    assert guard_verdict(Verdict.PASS, [reading], []) is Verdict.PASS
