"""The test uncertainty ratio of an ntc, rtd or ratiometric step, whose limits move with the
prediction.

An ntc step's limits are its prediction ± its tolerance, and the prediction follows the measured
temperature, so the file alone gives no TUR (``rig check`` shows ``-``).  With a unit file the
temperatures are known: at each end of its ``temperature_range`` (its one ambient without a
range) the sequence is predicted on the solver, and the step's window and the uncertainty of its
prediction come from the same computation a run judges by (``ntc_window``: the reference probe's
and meter's part of the temperature, the divider reference's, carried into U through the limits'
sensitivity to the prediction: 1 + t for a tolerance of t in %).  The meter's part is taken at the
upper limit on the range the plan holds, as ``rig check`` does for fixed limits
(``uncertainty_at_limit``).  The worst end is the one to quote.

A ratiometric step is judged around the transfer at the pressure it states, in % of its supply:
its window is that prediction ± its tolerance (percentage points, so the limits move one for one
with the prediction), and its U is the meter's uncertainty of both its
readings, output and supply, propagated into the ratio as the step does (``u_quotient``).  The
supply reading is predicted on the solver at each end of the range, and the output is taken at
the window's upper limit of that supply, as for an ntc step.

Pure computation: the caller hands in the plan and the unit.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace

from drivers.base import MeterFunction
from rig.analysis.predict import PredictedReading, SequencePredictor, StepPrediction
from rig.config.unit_file import UnitModel
from rig.judge.decision import COVERAGE_K, Limits, test_uncertainty_ratio
from rig.judge.propagate import u_quotient
from rig.models.rtd import T_MAX_C, T_MIN_C
from rig.plan import Plan, PlannedStep
from rig.step_judging import autorange_estimate, reading_u
from rig.steps import KINDS, StepSpec
from rig.steps.model_steps import (
    NtcWindow,
    ntc_window,
    ratiometric_prediction,
    stated_reference,
    stated_temperature,
)
from rig.steps.rtd_step import rtd_window

MODEL_KINDS = ("ntc", "rtd", "ratiometric")
"""The step kinds judged around a prediction that a unit file makes known before a run."""

Tolerance = tuple[str, float]
"""A step's tolerance as the sequence reader keeps it: ("pct", 5.0) or ("abs", 0.1)."""


@dataclass(frozen=True)
class TurAt:
    """A model step's expanded uncertainty (k = COVERAGE_K) and TUR at one ambient."""

    temp_c: float
    expanded: float
    tur: float
    stated_parts: tuple[tuple[str, float], ...] = ()
    """Each stated input with a u (``temperature``, ``pressure``, ``reference``) and the
    standard uncertainty it gives the step's U through the limits' sensitivity to the
    prediction (``NtcWindow.u_limits``), in the step's unit: what U is made of."""

    @property
    def dominant_stated(self) -> str | None:
        """The stated input that makes up more than half of U's variance, if one does: a
        smaller meter uncertainty then moves the TUR little, a smaller u of that input does."""
        u_c = self.expanded / COVERAGE_K
        for name, part in self.stated_parts:
            if part**2 > 0.5 * u_c**2:
                return name
        return None


@dataclass(frozen=True)
class ModelTur:
    """A model step's TUR at each end of the unit's temperature range."""

    step_id: str
    unit: str
    at: tuple[TurAt, ...]
    pressure_pa: float | None = None
    """The pressure a ratiometric step states, its prediction's input; None for an ntc step."""

    @property
    def worst(self) -> TurAt:
        return min(self.at, key=lambda found: found.tur)


def model_step_turs(
    plan: Plan, unit: UnitModel, tolerances: Mapping[str, Tolerance] | None = None
) -> dict[str, ModelTur]:
    """The TUR of every ntc and ratiometric step of ``plan`` at the ends of ``unit``'s
    temperature range, with its own tolerance or the one ``tolerances`` gives for its id (a
    proposal, before it is pasted); a step the prediction gives no usable value for is left
    out."""
    model = [
        p
        for p in plan.steps
        if p.spec.kind in MODEL_KINDS
        and (p.spec.params.get("model") or p.spec.params.get("r0_ohm"))
    ]
    if not model:
        return {}
    temps = unit.ambient_range_c or (unit.ambient_c,)
    found: dict[str, list[TurAt]] = {p.spec.id: [] for p in model}
    for temp_c in temps:
        predicted = SequencePredictor(plan, replace(unit, ambient_c=temp_c)).run()
        by_id = {p.step_id: p for p in predicted.steps}
        supply = {r.step_id: r for r in predicted.readings if r.role == "supply"}
        for planned in model:
            tolerance = (tolerances or {}).get(planned.spec.id)
            if planned.spec.kind == "ratiometric":
                at = _ratiometric_tur_at(
                    plan, planned, supply.get(planned.spec.id), temp_c, tolerance
                )
            elif planned.spec.kind == "rtd":
                at = _rtd_tur_at(plan, planned, by_id, temp_c, tolerance)
            else:
                at = _tur_at(plan, planned, by_id, temp_c, tolerance)
            if at is not None:
                found[planned.spec.id].append(at)
    units = {p.spec.id: str(p.spec.params.get("unit", KINDS[p.spec.kind].unit)) for p in model}
    pressures = {
        p.spec.id: float(p.spec.params["pressure_pa"])
        for p in model
        if p.spec.kind == "ratiometric"
    }
    return {
        step_id: ModelTur(step_id, units[step_id], tuple(at), pressures.get(step_id))
        for step_id, at in found.items()
        if at
    }


def _ratiometric_tur_at(
    plan: Plan,
    planned: PlannedStep,
    supply: PredictedReading | None,
    temp_c: float,
    tolerance: Tolerance | None,
) -> TurAt | None:
    """A ratiometric step's U and TUR with the supply its reading is predicted at: the window
    is the transfer at the stated pressure ± the tolerance (percentage points), the output is
    read at its upper limit on the range the plan holds, the supply autoranged, as a run does."""
    spec = planned.spec
    tol = tolerance[1] if tolerance is not None else spec.params.get("tolerance_pct")
    if tol is None or supply is None or not (math.isfinite(supply.value) and supply.value > 0):
        return None
    predicted, u_predicted = ratiometric_prediction(spec)
    limits = Limits(predicted - float(tol), predicted + float(tol))
    assert limits.high is not None
    v_out = limits.high / 100.0 * supply.value
    u_out = _meter_u(plan, planned, MeterFunction.DC_VOLTS, v_out)
    u_read = 100.0 * u_quotient(v_out, supply.value, u_out, supply.u_std)
    expanded = COVERAGE_K * math.hypot(u_read, u_predicted)
    return _tur_of(limits, expanded, temp_c, (("pressure", u_predicted),))


def _rtd_tur_at(
    plan: Plan,
    planned: PlannedStep,
    by_id: Mapping[str, StepPrediction],
    temp_c: float,
    tolerance: Tolerance | None,
) -> TurAt | None:
    """An rtd step's U and TUR at the temperature its reference is predicted to read: the window
    is R(T) (IEC 60751) ± its class through the slope there, or ± its tolerance; the meter read
    at the window's upper limit on the range the plan holds, the temperature's uncertainty
    carried through the slope, as a run judges it (``rig.steps.rtd_step``)."""
    spec, temperature = _spec_at(planned, by_id, tolerance)
    if spec is None or temperature is None or not T_MIN_C <= temperature[0] <= T_MAX_C:
        return None
    window = rtd_window(spec, temperature)
    parts = () if spec.params.get("temperature_from") else (("temperature", window.u_limits),)
    at_c = _judged_at(spec, temperature, temp_c)
    return _tur_of(window.limits, _expanded(plan, planned, spec, window), at_c, parts)


def _judged_at(spec: StepSpec, temperature: tuple[float, float], ambient_c: float) -> float:
    """The temperature a TUR is said to be at: the unit's ambient where the step reads its
    temperature from the bench's reference (which reads the ambient), else the temperature the
    step states (a sender judged at 100 degC in its well, whatever the room's)."""
    return ambient_c if spec.params.get("temperature_from") else temperature[0]


def _tur_at(
    plan: Plan,
    planned: PlannedStep,
    by_id: Mapping[str, StepPrediction],
    temp_c: float,
    tolerance: Tolerance | None,
) -> TurAt | None:
    """An ntc step's U and TUR, the same way, with the divider's reference where it reads a
    voltage (``ntc_window``)."""
    spec, temperature = _spec_at(planned, by_id, tolerance)
    if spec is None:
        return None
    reference = None
    if spec.params.get("mode") == "voltage":
        reference = _input(by_id, spec.params.get("reference_from"), stated_reference(spec))
        if reference is None:
            return None
    if temperature is None:
        return None
    window = ntc_window(spec, temperature, reference)
    expanded = _expanded(plan, planned, spec, window)
    at_c = _judged_at(spec, temperature, temp_c)
    return _tur_of(window.limits, expanded, at_c, _ntc_stated_parts(spec, temperature, reference))


def _spec_at(
    planned: PlannedStep, by_id: Mapping[str, StepPrediction], tolerance: Tolerance | None
) -> tuple[StepSpec | None, tuple[float, float] | None]:
    """An ntc or rtd step with ``tolerance`` in place of its own (an rtd step's class then
    set aside), and its temperature (value, standard uncertainty); no step where it has no
    tolerance (nor class) at all."""
    params = dict(planned.spec.params)
    if tolerance is not None:
        params["tolerance"], params["tolerance_class"] = tolerance, None
    if params.get("tolerance") is None and params.get("tolerance_class") is None:
        return None, None
    spec = replace(planned.spec, params=params)
    return spec, _input(by_id, params.get("temperature_from"), stated_temperature(spec))


def _expanded(plan: Plan, planned: PlannedStep, spec: StepSpec, window: NtcWindow) -> float:
    """U (k = COVERAGE_K): the meter's u at the window's upper limit on the range the plan
    holds, and what the prediction's u gives the limits (``NtcWindow.u_limits``)."""
    at = window.limits.high
    assert at is not None  # a class or a tolerance gives both sides
    function = KINDS[spec.kind].meter_function(spec)
    assert function is not None  # an ntc or rtd step reads ohms or volts
    u_meter = _meter_u(plan, planned, function, at)
    return COVERAGE_K * math.hypot(u_meter, window.u_limits)


def _ntc_stated_parts(
    spec: StepSpec, temperature: tuple[float, float], reference: tuple[float, float] | None
) -> tuple[tuple[str, float], ...]:
    """The prediction's u from each stated input alone (the other's u set to zero), through
    the same window a run judges by; an input read from an earlier step is not stated."""
    parts = []
    if not spec.params.get("temperature_from"):
        alone = None if reference is None else (reference[0], 0.0)
        parts.append(("temperature", ntc_window(spec, temperature, alone).u_limits))
    if reference is not None and not spec.params.get("reference_from"):
        parts.append(("reference", ntc_window(spec, (temperature[0], 0.0), reference).u_limits))
    return tuple(parts)


def _meter_u(plan: Plan, planned: PlannedStep, function: MeterFunction, value: float) -> float:
    """The meter's standard uncertainty of ``value`` on the range the plan holds for the step
    (the one autorange would pick where it holds none), as ``rig check`` takes it at a limit."""
    station = plan.station
    range_ = planned.range_ or autorange_estimate(station, function, value)
    return reading_u(station, function, value, range_)


def _tur_of(
    limits: Limits,
    expanded: float,
    temp_c: float,
    stated_parts: tuple[tuple[str, float], ...] = (),
) -> TurAt | None:
    """The step's U and TUR at ``temp_c``; None where U is not known."""
    tur = test_uncertainty_ratio(limits, expanded) if math.isfinite(expanded) else None
    return None if tur is None else TurAt(temp_c, expanded, tur, stated_parts)


def _input(
    by_id: Mapping[str, StepPrediction], source: str | None, stated: tuple[float, float] | None
) -> tuple[float, float] | None:
    """An input of the step (value, standard uncertainty): an earlier step's predicted value
    (with no uncertainty its NaN carries through, so no TUR is given, as a run gives none), or
    the value the file states with the uncertainty it states (0 where none, as a run takes it)."""
    if source:
        earlier = by_id.get(source)
        if earlier is None or not math.isfinite(earlier.value):
            return None
        return earlier.value, earlier.expanded_u / COVERAGE_K
    return stated
