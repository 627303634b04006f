"""Decision rules and verdicts (ILAC-G8:09/2019; JCGM 106:2012)."""

from __future__ import annotations

import math
from collections.abc import Callable

import pytest
from scipy import stats

import rig.judge as judging  # not "from ... import test_uncertainty_ratio": pytest would collect it
from rig.judge import (
    DecisionRule,
    Limits,
    Verdict,
    false_accept_risk_at_limit,
    judge,
    tur_is_low,
    worst,
)
from rig.models import ModelInputError

LIMITS = Limits(low=9.0, high=11.0)
U = 0.1


@pytest.mark.parametrize(
    ("value", "expected"),
    # ILAC-G8:09/2019; JCGM 106:2012: guarded acceptance with w = U, four zones at each limit
    [
        (10.0, Verdict.PASS),
        # low limit
        (9.15, Verdict.PASS),
        (9.05, Verdict.CONDITIONAL_PASS),
        (9.0, Verdict.CONDITIONAL_PASS),
        (8.95, Verdict.CONDITIONAL_FAIL),
        (8.85, Verdict.FAIL),
        # high limit
        (10.85, Verdict.PASS),
        (10.95, Verdict.CONDITIONAL_PASS),
        (11.0, Verdict.CONDITIONAL_PASS),
        (11.05, Verdict.CONDITIONAL_FAIL),
        (11.15, Verdict.FAIL),
    ],
)
def test_guarded_zones_at_both_limits(value: float, expected: Verdict) -> None:
    assert judge(value, LIMITS, U, DecisionRule.GUARDED) is expected


@pytest.mark.parametrize(
    ("value", "expected"),
    # ILAC-G8:09/2019: simple acceptance (w = 0) accepts up to the limit, no conditional verdicts
    [
        (9.05, Verdict.PASS),
        (9.0, Verdict.PASS),
        (8.95, Verdict.FAIL),
        (10.95, Verdict.PASS),
        (11.0, Verdict.PASS),
        (11.05, Verdict.FAIL),
    ],
)
def test_simple_acceptance(value: float, expected: Verdict) -> None:
    assert judge(value, LIMITS, U, DecisionRule.SIMPLE) is expected


def test_one_sided_limits() -> None:
    # ILAC-G8:09/2019 zones apply to a single limit the same way; the sensor ground check value
    # "under 0.02 V" is common practice, no published source
    ground = Limits(low=None, high=0.02)
    assert judge(0.005, ground, 0.002, DecisionRule.GUARDED) is Verdict.PASS
    assert judge(0.019, ground, 0.002, DecisionRule.GUARDED) is Verdict.CONDITIONAL_PASS
    assert judge(0.021, ground, 0.002, DecisionRule.GUARDED) is Verdict.CONDITIONAL_FAIL
    assert judge(0.5, ground, 0.002, DecisionRule.GUARDED) is Verdict.FAIL
    assert judge(-1e6, ground, 0.002, DecisionRule.GUARDED) is Verdict.PASS


@pytest.mark.parametrize("value", [math.nan, math.inf, -math.inf, 9.9e37, -9.9e37, 9.91e37])
@pytest.mark.parametrize("rule", list(DecisionRule))
def test_no_reading_never_passes(value: float, rule: DecisionRule) -> None:
    # SCPI-1999 (FIELD-NOTES.md): 9.9E37 is overload, 9.91E37 not a number; with one-sided
    # limits too, where -inf would otherwise sit "inside"
    assert judge(value, LIMITS, U, rule) is Verdict.FAIL
    assert judge(value, Limits(None, 1.0), U, rule) is Verdict.FAIL
    assert judge(value, Limits(0.0, None), U, rule) is Verdict.FAIL


def test_false_accept_risk_with_guard_band_u() -> None:
    # ILAC-G8:09/2019; JCGM 106:2012: w = U with k = 2 limits the risk to 1 - Phi(2) = 2.275 %;
    # scipy.stats.norm as the reference library
    u = 0.05
    risk = false_accept_risk_at_limit(2 * u, u)
    assert risk == pytest.approx(0.02275, abs=5e-6)
    assert risk == pytest.approx(float(stats.norm.sf(2.0)), rel=1e-12)


def test_false_accept_risk_simple_acceptance() -> None:
    # ILAC-G8:09/2019: simple acceptance has up to 50 % risk at the limit
    assert false_accept_risk_at_limit(0.0, 0.05) == pytest.approx(0.5)
    # and 1 - Phi(1) = 15.87 % with w = u (scipy.stats.norm as the reference library)
    assert false_accept_risk_at_limit(0.05, 0.05) == pytest.approx(float(stats.norm.sf(1.0)))


def test_test_uncertainty_ratio() -> None:
    # common practice in calibration, no single published source: span / 2U, 4:1 minimum
    assert judging.test_uncertainty_ratio(LIMITS, 0.25) == pytest.approx(4.0)
    assert judging.test_uncertainty_ratio(LIMITS, 0.5) == pytest.approx(2.0)
    assert judging.test_uncertainty_ratio(Limits(None, 0.02), 0.001) is None
    assert judging.test_uncertainty_ratio(LIMITS, 0.0) == math.inf
    assert not tur_is_low(4.0)
    assert tur_is_low(3.99)
    assert not tur_is_low(10.0)


def test_a_low_tur_near_the_minimum_is_not_shown_as_the_minimum() -> None:
    # 3.6:1 is under the 4:1 minimum (common practice, no published source): shown rounded to a
    # whole number it read "4:1 LOW", a ratio at the minimum marked as under it
    from rig.judge.decision import tur_text

    assert tur_text(3.6) == "3.6:1 LOW"
    assert tur_text(2.586) == "2.5:1 LOW"  # under the minimum, rounded down
    assert tur_text(4.0) == "4.0:1"
    assert tur_text(12.4) == "12:1"
    assert tur_text(None) == "-"


def test_worst_rolls_up_a_run() -> None:
    p, cp, cf, f, e, s = (
        Verdict.PASS,
        Verdict.CONDITIONAL_PASS,
        Verdict.CONDITIONAL_FAIL,
        Verdict.FAIL,
        Verdict.ERROR,
        Verdict.SKIPPED,
    )
    assert worst([p, p, p]) is p
    assert worst([p, cp, p]) is cp
    assert worst([cp, cf, p]) is cf
    assert worst([cf, f, cp]) is f
    assert worst([f, e, p]) is e
    assert worst([s, p, s]) is p
    assert worst([s, s]) is s
    assert worst([]) is s


def test_verdict_words() -> None:
    # ILAC-G8:09/2019 vocabulary plus error and skipped (DESIGN.md)
    assert [v.value for v in Verdict] == [
        "pass",
        "conditional pass",
        "conditional fail",
        "fail",
        "error",
        "skipped",
    ]


def test_limit_constructors() -> None:
    assert Limits.nominal_tol(10.0, 0.5) == Limits(9.5, 10.5)
    lim = Limits.nominal_pct(-2.0, 5.0)
    assert (lim.low, lim.high) == pytest.approx((-2.1, -1.9))
    assert LIMITS.span == 2.0


@pytest.mark.parametrize(
    ("call", "match"),
    [
        (lambda: Limits(None, None), "at least one"),
        (lambda: Limits(2.0, 1.0), "above high limit"),
        (lambda: Limits(math.nan, 1.0), "low must be a finite number"),
        (lambda: Limits.nominal_tol(1.0, -0.1), "tol"),
        (lambda: judge(1.0, LIMITS, -0.1, DecisionRule.GUARDED), "expanded_u"),
        (lambda: judge(1.0, LIMITS, 0.1, "guarded"), "not a DecisionRule"),  # type: ignore[arg-type]
        (lambda: false_accept_risk_at_limit(0.1, 0.0), "standard uncertainty above 0"),
    ],
)
def test_bad_input_is_a_clear_error(call: Callable[[], object], match: str) -> None:
    with pytest.raises(ModelInputError, match=match):
        call()
