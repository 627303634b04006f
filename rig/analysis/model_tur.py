"""The test uncertainty ratio of an ntc step, whose limits move with the prediction.

An ntc step's limits are its prediction ± its tolerance, and the prediction follows the measured
temperature, so the file alone gives no TUR (``rig check`` shows ``-``).  With a unit file the
temperatures are known: at each end of its ``temperature_range`` (its one ambient without a
range) the sequence is predicted on the solver, and the step's window and the uncertainty of its
prediction come from the same computation a run judges by (``ntc_window``: the reference probe's
and meter's part of the temperature, the divider reference's).  The meter's part is taken at the
upper limit on the range the plan holds, as ``rig check`` does for fixed limits
(``uncertainty_at_limit``).  The worst end is the one to quote.

Pure computation: the caller hands in the plan and the unit.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass, replace

from rig.analysis.predict import SequencePredictor, StepPrediction
from rig.config.unit_file import UnitModel
from rig.judge.decision import COVERAGE_K, test_uncertainty_ratio
from rig.plan import Plan, PlannedStep
from rig.step_judging import autorange_estimate, reading_u
from rig.steps import KINDS
from rig.steps.model_steps import ntc_window

Tolerance = tuple[str, float]
"""A step's tolerance as the sequence reader keeps it: ("pct", 5.0) or ("abs", 0.1)."""


@dataclass(frozen=True)
class TurAt:
    """A model step's expanded uncertainty (k = COVERAGE_K) and TUR at one ambient."""

    temp_c: float
    expanded: float
    tur: float


@dataclass(frozen=True)
class ModelTur:
    """A model step's TUR at each end of the unit's temperature range."""

    step_id: str
    unit: str
    at: tuple[TurAt, ...]

    @property
    def worst(self) -> TurAt:
        return min(self.at, key=lambda found: found.tur)


def model_step_turs(
    plan: Plan, unit: UnitModel, tolerances: Mapping[str, Tolerance] | None = None
) -> dict[str, ModelTur]:
    """The TUR of every ntc step of ``plan`` at the ends of ``unit``'s temperature range, with
    its own tolerance or the one ``tolerances`` gives for its id (a proposal, before it is
    pasted); a step the prediction gives no usable value for is left out."""
    ntc = [p for p in plan.steps if p.spec.kind == "ntc" and p.spec.params.get("model")]
    if not ntc:
        return {}
    temps = unit.ambient_range_c or (unit.ambient_c,)
    found: dict[str, list[TurAt]] = {p.spec.id: [] for p in ntc}
    for temp_c in temps:
        predicted = SequencePredictor(plan, replace(unit, ambient_c=temp_c)).predict()
        by_id = {p.step_id: p for p in predicted}
        for planned in ntc:
            tolerance = (tolerances or {}).get(planned.spec.id)
            at = _tur_at(plan, planned, by_id, temp_c, tolerance)
            if at is not None:
                found[planned.spec.id].append(at)
    units = {p.spec.id: str(p.spec.params["unit"]) for p in ntc}
    return {
        step_id: ModelTur(step_id, units[step_id], tuple(at)) for step_id, at in found.items() if at
    }


def _tur_at(
    plan: Plan,
    planned: PlannedStep,
    by_id: Mapping[str, StepPrediction],
    temp_c: float,
    tolerance: Tolerance | None,
) -> TurAt | None:
    spec = planned.spec
    params = dict(spec.params)
    if tolerance is not None:
        params["tolerance"] = tolerance
    if params.get("tolerance") is None:
        return None
    spec = replace(spec, params=params)
    temperature = _input(by_id, params.get("temperature_from"), params.get("temperature_c"))
    reference = None
    if params.get("mode") == "voltage":
        reference = _input(by_id, params.get("reference_from"), params.get("reference_v"))
        if reference is None:
            return None
    if temperature is None:
        return None
    window = ntc_window(spec, temperature, reference)
    at = window.limits.high
    assert at is not None  # a tolerance gives both sides
    function = KINDS[spec.kind].meter_function(spec)
    assert function is not None  # an ntc step reads ohms or volts
    station = plan.station
    range_ = planned.range_ or autorange_estimate(station, function, at)
    u_meter = reading_u(station, function, at, range_)
    expanded = COVERAGE_K * math.hypot(u_meter, window.u_std)
    tur = test_uncertainty_ratio(window.limits, expanded) if math.isfinite(expanded) else None
    return None if tur is None else TurAt(temp_c, expanded, tur)


def _input(
    by_id: Mapping[str, StepPrediction], source: str | None, stated: float | None
) -> tuple[float, float] | None:
    """An input of the step (value, standard uncertainty): an earlier step's predicted value
    (with no uncertainty its NaN carries through, so no TUR is given, as a run gives none), or
    the value the file states (no uncertainty, as a run takes it)."""
    if source:
        earlier = by_id.get(source)
        if earlier is None or not math.isfinite(earlier.value):
            return None
        return earlier.value, earlier.expanded_u / COVERAGE_K
    return None if stated is None else (float(stated), 0.0)
