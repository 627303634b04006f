"""Judging one step's outcome with the station's uncertainty: pure computation, shared by the
engine (which measures) and the analysis tools (which predict), so that a prediction is judged
exactly as a run is."""

from __future__ import annotations

import math
from collections.abc import Mapping

from drivers.base import MeterFunction
from rig.config.station import FUNCTIONS, Station
from rig.events import StepResult
from rig.judge.accuracy import AccuracySpec
from rig.judge.decision import (
    COVERAGE_K,
    DecisionRule,
    Verdict,
    is_no_reading,
    judge,
    test_uncertainty_ratio,
)
from rig.judge.reference_probe import reading_u_c
from rig.models.rtd import Rtd
from rig.quantity import format_quantity
from rig.steps import KINDS, Outcome, Reading, StepSpec


def judge_outcome(
    spec: StepSpec, outcome: Outcome, *, error: bool
) -> tuple[Verdict, float, float | None]:
    """Verdict, expanded uncertainty (k = COVERAGE_K) and TUR of one step's outcome; shared with
    the analysis tools so that a prediction is judged exactly as a run is."""
    expanded = COVERAGE_K * outcome.u_std if math.isfinite(outcome.u_std) else math.nan
    tur = None
    if error:
        verdict = Verdict.ERROR
    elif outcome.limits is None:
        verdict = Verdict.PASS if math.isfinite(outcome.value) else Verdict.FAIL
    else:
        verdict = judge(
            outcome.value,
            outcome.limits,
            expanded if math.isfinite(expanded) else 0.0,
            spec.rule,
        )
        if math.isfinite(expanded) and expanded > 0:
            tur = test_uncertainty_ratio(outcome.limits, expanded)
    return verdict, expanded, tur


_FAILED = (Verdict.FAIL, Verdict.CONDITIONAL_FAIL, Verdict.ERROR)


def failed_input(spec: StepSpec, earlier: Mapping[str, StepResult]) -> str:
    """Why a step cannot be judged, where an earlier step it takes an input from (its
    ``temperature_from`` or ``reference_from``) failed or could not measure: its value is no
    temperature or reference to predict the unit's reading from, so the step is not measured
    and is skipped with this note (empty where its inputs stand)."""
    for key, (source, _) in spec.inputs.items():
        found = earlier.get(source)
        if found is not None and found.verdict in _FAILED:
            return (
                f"not judged: its {key} step {source} ended {found.verdict.value}, so it has no "
                "trustworthy input to predict the reading from"
            )
    return ""


def no_uncertainty_note(
    spec: StepSpec, outcome: Outcome, earlier: Mapping[str, StepResult], station: Station
) -> str:
    """The note of a step judged against limits with no uncertainty, saying why (empty where
    it has one, or nothing was read): such a verdict could not weigh the meter's error, so it
    must not pass without a word."""
    if outcome.limits is None or is_no_reading(outcome.value) or math.isfinite(outcome.u_std):
        return ""
    causes = [_why_no_u(r, station) for r in outcome.readings if not math.isfinite(r.u_std)]
    causes += [
        f"step {ref}'s value has none"
        for ref in spec.depends_on
        if ref in earlier and not math.isfinite(earlier[ref].u_std)
    ]
    text = "judged with no uncertainty"
    if spec.rule is DecisionRule.GUARDED:
        text += ", so without the guarded rule's guard band"
    return f"{text}: {'; '.join(causes)}" if causes else text


def _why_no_u(reading: Reading, station: Station) -> str:
    """Why one reading has no uncertainty, in the station file's words."""
    if reading.function == "supply-current":
        return "the supply's current readback has none: the station states no accuracy for it"
    if is_no_reading(reading.value):
        return f"the {reading.function} reading is no reading"
    unit = FUNCTIONS.get(reading.function, "")
    value = format_quantity(reading.value, unit)
    try:
        top = station.dmm_accuracy.ranges(reading.function)[-1]
    except ValueError:
        return f"the {reading.function} reading {value} has none"
    return (
        f"the {reading.function} reading {value} is above the largest {reading.function} range "
        f"of the station's accuracy table ({format_quantity(top, unit)})"
    )


def uncertainty_at_limit(
    station: Station, spec: StepSpec, range_: float | None
) -> tuple[float, float | None] | None:
    """The expanded uncertainty (k = COVERAGE_K) of a reading at the step's upper limit (its
    lower one where it has no upper) on ``range_``, and the test uncertainty ratio of its limits
    (None for one-sided limits): what ``rig check`` shows for a step and ``rig limits`` for a
    proposal.  None where no range is held, or the limits are not in the meter's unit (but a
    reference temperature's: its U is the run's, from the Pt100's ohms and the probe's own)."""
    kind = KINDS[spec.kind]
    function = kind.meter_function(spec)
    limits = spec.limits
    if spec.kind == SUPPLY_CURRENT and limits is not None:
        at = limits.high if limits.high is not None else limits.low
        assert at is not None  # Limits has at least one side
        u, _ = supply_current_u(station, at)
        if not math.isfinite(u):
            return None
        return COVERAGE_K * u, test_uncertainty_ratio(limits, COVERAGE_K * u)
    reference = spec.kind == REFERENCE_TEMPERATURE
    if function is None or range_ is None or limits is None:
        return None
    if not (kind.limits_in_meter_units or reference):
        return None
    at = limits.high if limits.high is not None else limits.low
    assert at is not None  # Limits has at least one side
    try:
        accuracy = station.dmm_accuracy.spec_for(function.value, range_)
    except ValueError:
        return None
    if reference:  # the Pt100's resistance there, through its slope, with the probe's own u
        rtd = Rtd(r0_ohm=float(spec.params["r0_ohm"]))
        u_ohm = accuracy.standard_uncertainty(float(rtd.r_at(at)), range_)
        u = reading_u_c(rtd, u_ohm, station.reference_probe, at)[1]
    else:
        u = accuracy.standard_uncertainty(at, range_)
    expanded = COVERAGE_K * u
    return expanded, test_uncertainty_ratio(limits, expanded)


REFERENCE_TEMPERATURE = "reference-temperature"
"""The step kind judged in degC off the meter's ohms: its U at a limit is the run's own."""


SUPPLY_CURRENT = "supply-current"
"""The step kind judged on the supply's own current readback, not on the meter."""


def supply_current_u(station: Station, value: float) -> tuple[float, float | None]:
    """Standard uncertainty and range of the supply's current readback at ``value``, from
    ``[supply.accuracy.current]`` (GUM 4.3.7); (NaN, None) where the station states none.  One
    function for the run, the prediction and ``rig check``, so that all three agree."""
    stated = station.supply_accuracy.get("current")
    if stated is None or not math.isfinite(value):
        return math.nan, None
    range_, accuracy = stated
    return float(accuracy.standard_uncertainty(value, range_)), range_


def autorange_estimate(station: Station, function: MeterFunction, value: float) -> float | None:
    """The range autorange would pick for ``value`` (None for no reading)."""
    if not math.isfinite(value):
        return None
    try:
        return float(station.dmm_accuracy.range_for(function.value, abs(value)))
    except ValueError:
        return None


def meter_ranges(station: Station, function: MeterFunction) -> list[float]:
    """The ranges the station's accuracy table lists for ``function`` (empty: none listed)."""
    try:
        return station.dmm_accuracy.ranges(function.value)
    except ValueError:  # no row for the function
        return []


def meter_accuracy(
    station: Station, function: MeterFunction, range_: float | None
) -> AccuracySpec | None:
    """The station's accuracy spec for ``function`` on ``range_`` (None: not listed)."""
    if range_ is None:
        return None
    try:
        return station.dmm_accuracy.spec_for(function.value, range_)
    except ValueError:
        return None


def lead_zero_ohm(station: Station, hi: str, lo: str) -> float:
    """The station's stored fixture lead resistance for a pin pair, either way round (0: none)."""
    zeros = station.lead_zero_ohm
    return zeros.get(f"{hi}:{lo}", zeros.get(f"{lo}:{hi}", 0.0))


def reading_u(
    station: Station, function: MeterFunction, value: float, range_: float | None
) -> float:
    """Standard uncertainty of one reading from the station's accuracy table (GUM 4.3.7)."""
    spec = meter_accuracy(station, function, range_)
    if not math.isfinite(value) or spec is None or range_ is None:
        return math.nan
    return float(spec.standard_uncertainty(value, range_))
