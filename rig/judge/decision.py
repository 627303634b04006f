"""Decisions against limits that account for the meter's uncertainty (ILAC-G8:09/2019).

Under simple acceptance (guard band w = 0) a value inside the limits passes, with a false-accept
risk of up to 50 % right at a limit.  Under guarded acceptance (w = U, k = 2) a pass needs the value
inside by more than U, which bounds that risk at 1 - Phi(2) = 2.275 % (JCGM 106:2012); values within
U of a limit get the conditional verdicts.

A value that is NaN, infinite or an SCPI overload (|x| >= 9.9e37) never passes: it is judged
``fail``, not ``error``, because an overload on a resistance or a voltage-drop check is what an open
circuit really reads, so the unit is at fault, not the measurement.  A step that could not measure
at all is reported ``error`` by whoever ran it, not here.
"""

from __future__ import annotations

import enum
import math
from collections.abc import Iterable
from dataclasses import dataclass

from rig.models._common import ModelInputError, require_finite

SCPI_OVERLOAD = 9.9e37
"""SCPI's overload / infinity value; anything at or beyond it is no reading at all."""

COVERAGE_K = 2.0
"""Coverage factor for expanded uncertainty: about 95 % (JCGM 100:2008, 6.2)."""

TUR_MINIMUM = 4.0
"""Usual minimum test uncertainty ratio (common practice in calibration, no published source)."""


class DecisionRule(enum.Enum):
    """How the expanded uncertainty moves the acceptance limit."""

    SIMPLE = "simple"
    """Guard band 0: accept up to the limit."""
    GUARDED = "guarded"
    """Guard band w = U: accept only inside the limits by more than U."""


class Verdict(enum.Enum):
    """Outcome of one check (ILAC-G8:09/2019 statements plus error and skipped)."""

    PASS = "pass"
    CONDITIONAL_PASS = "conditional pass"
    CONDITIONAL_FAIL = "conditional fail"
    FAIL = "fail"
    ERROR = "error"
    SKIPPED = "skipped"


_SEVERITY = {
    Verdict.PASS: 0,
    Verdict.CONDITIONAL_PASS: 1,
    Verdict.CONDITIONAL_FAIL: 2,
    Verdict.FAIL: 3,
    Verdict.ERROR: 4,
}


def worst(verdicts: Iterable[Verdict]) -> Verdict:
    """The verdict of a run from its checks, so one bad check decides the whole.

    Order: error > fail > conditional fail > conditional pass > pass.  Skipped checks do not
    count; a run with nothing but skipped checks (or no checks) is skipped.
    """
    counted = [v for v in verdicts if v is not Verdict.SKIPPED]
    for v in counted:
        if not isinstance(v, Verdict):
            raise ModelInputError(f"{v!r} is not a Verdict")
    if not counted:
        return Verdict.SKIPPED
    return max(counted, key=_SEVERITY.__getitem__)


def _limit(value: float | None, name: str) -> float | None:
    if value is None:
        return None
    return require_finite(value, name)


@dataclass(frozen=True)
class Limits:
    """Acceptance limits, inclusive; either side may be ``None`` for a one-sided limit."""

    low: float | None
    high: float | None

    def __post_init__(self) -> None:
        low = _limit(self.low, "low")
        high = _limit(self.high, "high")
        if low is None and high is None:
            raise ModelInputError("limits need at least one of low and high")
        if low is not None and high is not None and low > high:
            raise ModelInputError(f"low limit {low!r} is above high limit {high!r}")
        object.__setattr__(self, "low", low)
        object.__setattr__(self, "high", high)

    @classmethod
    def nominal_tol(cls, nominal: float, tol: float) -> Limits:
        """nominal +- tol, in the value's unit."""
        nominal = require_finite(nominal, "nominal")
        tol = require_finite(tol, "tol")
        if tol < 0.0:
            raise ModelInputError(f"tol = {tol!r}: a tolerance is 0 or above")
        return cls(nominal - tol, nominal + tol)

    @classmethod
    def nominal_pct(cls, nominal: float, pct: float) -> Limits:
        """nominal +- pct % of |nominal|."""
        nominal = require_finite(nominal, "nominal")
        pct = require_finite(pct, "pct")
        if pct < 0.0:
            raise ModelInputError(f"pct = {pct!r}: a tolerance is 0 % or above")
        return cls.nominal_tol(nominal, abs(nominal) * pct / 100.0)

    @property
    def span(self) -> float | None:
        """high - low, or ``None`` for a one-sided limit."""
        if self.low is None or self.high is None:
            return None
        return self.high - self.low

    def margin(self, value: float) -> float:
        """Distance from ``value`` to the nearer limit: positive inside, negative outside."""
        margins = []
        if self.low is not None:
            margins.append(value - self.low)
        if self.high is not None:
            margins.append(self.high - value)
        return min(margins)


def is_no_reading(value: float) -> bool:
    """True for NaN, +-inf and SCPI overload: values that say nothing was measured in range."""
    return not math.isfinite(value) or abs(value) >= SCPI_OVERLOAD


def judge(value: float, limits: Limits, expanded_u: float, rule: DecisionRule) -> Verdict:
    """The verdict for ``value`` against ``limits`` given its expanded uncertainty U.

    SIMPLE: inside (limits included) -> pass, outside -> fail.  GUARDED: inside by more than U ->
    pass; inside but within U of a limit -> conditional pass; outside by no more than U ->
    conditional fail; outside by more than U -> fail.  No reading (NaN, inf, overload) -> fail.
    """
    if not isinstance(rule, DecisionRule):
        raise ModelInputError(f"rule {rule!r} is not a DecisionRule: expected SIMPLE or GUARDED")
    try:
        value = float(value)
    except (TypeError, ValueError) as exc:
        raise ModelInputError(f"value {value!r} is not a number") from exc
    u = require_finite(expanded_u, "expanded_u")
    if u < 0.0:
        raise ModelInputError(f"expanded_u = {u!r}: an expanded uncertainty is 0 or above")
    if is_no_reading(value):
        return Verdict.FAIL
    m = limits.margin(value)
    if rule is DecisionRule.SIMPLE:
        return Verdict.PASS if m >= 0.0 else Verdict.FAIL
    if m > u:
        return Verdict.PASS
    if m >= 0.0:
        return Verdict.CONDITIONAL_PASS
    if m >= -u:
        return Verdict.CONDITIONAL_FAIL
    return Verdict.FAIL


def test_uncertainty_ratio(limits: Limits, expanded_u: float) -> float | None:
    """TUR = tolerance span / (2 U); ``None`` for a one-sided limit, inf when U is 0.

    (The name starts with ``test_``: test modules should import this module, not the name, or
    pytest will try to collect it.)
    """
    u = require_finite(expanded_u, "expanded_u")
    if u < 0.0:
        raise ModelInputError(f"expanded_u = {u!r}: an expanded uncertainty is 0 or above")
    span = limits.span
    if span is None:
        return None
    return math.inf if u == 0.0 else span / (2.0 * u)


def tur_is_low(tur: float) -> bool:
    """True under the usual 4:1 minimum (common practice, no published source)."""
    if math.isnan(tur):
        raise ModelInputError("tur is NaN: expected a ratio")
    return tur < TUR_MINIMUM


def tur_text(tur: float | None) -> str:
    """A test uncertainty ratio as ``rig check`` and ``rig limits`` show it, marked ``LOW``
    under the usual minimum (``-`` where there is none: a one-sided limit).  Under 10:1 with one
    decimal, as a run shows it, so that 3.6:1 does not read as a 4:1 marked LOW; under the
    minimum rounded down, so that 3.96:1 reads 3.9:1 LOW, never 4.0:1 LOW."""
    if tur is None:
        return "-"
    if tur_is_low(tur):
        shown = f"{math.floor(tur * 10) / 10:.1f}"
    else:
        shown = f"{tur:.1f}" if tur < 10 else f"{tur:.0f}"
    return f"{shown}:1" + (" LOW" if tur_is_low(tur) else "")


def false_accept_risk_at_limit(w: float, u: float) -> float:
    """Specific false-accept risk for a value measured exactly at the acceptance limit.

    With acceptance limit = tolerance limit - w and a normal distribution of standard uncertainty
    u about the measured value, the chance the true value lies beyond the tolerance limit is
    1 - Phi(w / u) (JCGM 106:2012).  w = 0 gives 50 %; w = U = 2u gives 2.275 %.
    """
    w = require_finite(w, "w")
    u = require_finite(u, "u")
    if u <= 0.0:
        raise ModelInputError(f"u = {u!r}: a standard uncertainty above 0 is needed for a risk")
    return 0.5 * math.erfc(w / (u * math.sqrt(2.0)))
