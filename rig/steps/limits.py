"""Reading a step's limits from its file: absolute low/high, nominal ± tolerance, or max |value|."""

from __future__ import annotations

from rig.config.model_input import built
from rig.config.reader import Section
from rig.judge.decision import Limits
from rig.quantity import QuantityError, format_quantity, parse_quantity

RECORD_DIGITS = 10
"""Significant digits of a parameter written into a run's record: as many as a file holds."""


def read_tolerance(sec: Section, unit: str, key: str = "tolerance") -> tuple[str, float] | None:
    """``"5 %"`` -> ("pct", 5.0); ``"0.1 V"`` -> ("abs", 0.1)."""
    raw = sec.raw(key)
    if raw is None:
        return None
    try:
        found = "pct", parse_quantity(raw, "%")
    except QuantityError:
        try:
            found = "abs", parse_quantity(raw, unit)
        except QuantityError:
            sec.problem(key, f"expected a tolerance in % or in {unit} (e.g. '5 %'), found {raw!r}")
            return None
    if found[1] <= 0:  # zero too: limits of one point no reading could pass under guarded rules
        sec.problem(key, f"expected a positive tolerance, found {raw!r}")
        return None
    return found


def tolerance_text(tolerance: tuple[str, float], unit: str) -> str:
    """A tolerance as ``read_tolerance`` gives it, as text: ("pct", 5.0) -> ``5 %``."""
    kind, amount = tolerance
    return format_quantity(amount, "%" if kind == "pct" else unit, RECORD_DIGITS)


def limit_sensitivity(tolerance: tuple[str, float] | None) -> float:
    """How far a step's limits around a prediction move per unit the prediction moves, on the
    side that moves most: the limit's sensitivity coefficient to the prediction (JCGM 100:2008,
    GUM, 5.1.2).  A tolerance of t % puts the limits at (1 - t/100) and (1 + t/100) times the
    prediction, so an error in the prediction moves the upper limit (1 + t/100) times as far;
    one in the step's unit moves both limits by the prediction's error itself (1).  A step
    stores one U, so the larger, upper side's factor is the one it is given: conservative at
    the lower limit by 2 t/100 of the prediction's part.  None (an rtd class) counts as 1."""
    if tolerance is None or tolerance[0] != "pct":
        return 1.0
    return 1.0 + abs(tolerance[1]) / 100.0


def apply_tolerance(nominal: float, tolerance: tuple[str, float]) -> Limits:
    kind, amount = tolerance
    if kind == "pct":
        return Limits.nominal_pct(nominal, amount)
    return Limits.nominal_tol(nominal, amount)


def read_limits(sec: Section, unit: str, *, required: bool = True) -> Limits | None:
    """Fixed limits of a step: ``low``/``high``, ``nominal`` + ``tolerance``, or ``max``.

    A limit key that is there but wrong is reported once, by itself: it is not also "no limits"
    or "nominal needs a tolerance"."""
    low = sec.quantity("low", unit, None)
    high = sec.quantity("high", unit, None)
    nominal = sec.quantity("nominal", unit, None)
    most = sec.quantity("max", unit, None, positive=True)
    tolerance = read_tolerance(sec, unit)
    if sec.has("tolerance") and not sec.has("nominal"):
        sec.problem("tolerance", "a tolerance needs a nominal value; give nominal too")
    if nominal is not None:
        if tolerance is None:
            if not sec.has("tolerance"):
                sec.missing("tolerance", f"a tolerance such as '5 %' or '0.1 {unit}' for nominal")
            return None
        if low is not None or high is not None or most is not None:
            sec.problem("nominal", "give either nominal + tolerance, low/high, or max, not several")
        return built(sec, "tolerance", lambda: apply_tolerance(nominal, tolerance))
    if most is not None:
        if low is not None or high is not None:
            sec.problem("max", "give either max or low/high, not both")
        return Limits(-most, most)
    if low is None and high is None:
        limit_keys = ("low", "high", "nominal", "max", "tolerance")
        if required and not any(sec.has(key) for key in limit_keys):
            sec.problem(
                "low",
                f"no limits; expected low and/or high, nominal + tolerance, or max (in {unit})",
            )
        return None
    if low is not None and high is not None and low >= high:
        sec.problem("high", f"high ({high:g} {unit}) must be above low ({low:g} {unit})")
        return None
    return Limits(low, high)
