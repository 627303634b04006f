"""Monte Carlo over a good unit's tolerances: what each step of a sequence reads across units.

Every part with a stated tolerance is drawn at random (how, and why, is listed by ``Draw``), the
unit is solved on its fixture for every reading the sequence takes, the meter's error is added,
and each step computes its value exactly as its step kind does.  The result is, per step, the
distribution of the figure its limits apply to, for units that are good by definition.

The parts are drawn by ``rig.analysis.good_units``; each reading is computed, fast and exactly, by
``rig.analysis.reading_model``.  Here the readings become each step's value and figure.

Pure computation: the caller loads the files and hands in the plan, the unit and the nominal
prediction.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, field

import numpy as np

from rig.analysis.bench_model import Condition, StaticBench
from rig.analysis.good_units import Draw, FloatArray, GoodUnitSampler, Samples
from rig.analysis.predict import PredictedReading, Prediction
from rig.analysis.reading_model import (
    MeterError,
    PortModel,
    ReadingModel,
    circuit_ports,
    prepared_circuit,
)
from rig.analysis.stated_inputs import (
    StatedInput,
    drawn_shifts,
    pilot_shifts,
    sensor_of,
    stated_inputs,
)
from rig.analysis.supply_output import ELEMENT as SUPPLY_ELEMENT
from rig.analysis.supply_output import SupplyOutput, moves_with_supply
from rig.config.station import Station
from rig.config.unit_file import UnitModel
from rig.models._common import ModelInputError
from rig.models.divider import divider_voltage
from rig.models.rtd import Rtd
from rig.plan import Plan
from rig.step_judging import lead_zero_ohm
from rig.steps import KINDS, StepSpec

PRUNE_FRACTION = 1e-4
"""An element is left out of a reading when leaving it at nominal moves the reading by less than
this fraction of the meter's standard uncertainty there."""

SKIP_REASONS = {
    "prompt": "an operator prompt: nothing is measured",
    "soak": "a timed wait: nothing is measured",
    "supply-current": "the supply's own current readback is not modelled by the Monte Carlo",
}

NOT_LINEAR = (
    "a good unit's reading here is not the linear circuit the Monte Carlo solves (the supply in "
    "current limit, or the meter in overload)"
)

READING_ROLES: dict[str, tuple[str, ...]] = {
    "volts": ("hi-lo",),
    "ground-drop": ("hi-lo",),
    "wire-drop": ("direct",),
    "resistance": ("hi-lo",),
    "reference-temperature": ("pt-4w",),
    "rtd": ("rtd",),
    "ratiometric": ("output", "supply"),
}
"""The readings each kind's judged value is computed from (ntc: by its mode)."""


# --- the steps --------------------------------------------------------------------------------


@dataclass
class StepDistribution:
    """One step across the drawn units: its value and the figure its limits apply to."""

    spec: StepSpec
    values: FloatArray
    figure: FloatArray
    """The value itself (window limits), or its deviation from the step's prediction (``ntc``
    in % or in the value's unit, ``ratiometric`` in percentage points)."""
    figure_unit: str
    form: str
    """"window" (low/high limits), "tolerance" (± around the prediction) or "magnitude" (a
    bound on the size alone, ``max``)."""
    judged_at_c: FloatArray | None = None
    """An ntc or rtd step's temperature per unit, as its run would take it (``judged_at``):
    an rtd step's class limits move with it."""


@dataclass
class MonteCarloResult:
    samples: int
    seed: int
    draws: list[Draw]
    steps: list[StepDistribution] = field(default_factory=list)
    skipped: dict[str, str] = field(default_factory=dict)
    """step id -> why it has no distribution"""
    elements_per_reading: dict[str, int] = field(default_factory=dict)
    no_meter_error: list[str] = field(default_factory=list)
    """Readings (``step/role``) the station's accuracy table does not cover: drawn exact."""
    supply_exact: list[str] = field(default_factory=list)
    """Steps whose readings follow the supply's output, taken as exactly its setting because
    the station states no setting accuracy."""


def reading_roles(spec: StepSpec) -> tuple[str, ...] | None:
    if spec.kind == "ntc":
        return ("signal",) if spec.params.get("mode") == "voltage" else ("ntc",)
    return READING_ROLES.get(spec.kind)


def model_or_nan(
    model: Callable[[FloatArray], object], x: FloatArray, stand_in: float
) -> FloatArray:
    """``model(x)`` where the model takes x, NaN where it does not (no reading, an overload, a
    resistance off the curve): the step kinds turn those into a failed or an error step."""
    x = np.asarray(x, dtype=np.float64)
    ok = np.isfinite(x)
    try:
        out = np.asarray(model(np.where(ok, x, stand_in)), dtype=np.float64)
    except ModelInputError:  # rare (faulted units): find the values one by one
        out = np.array([_one(model, v) if k else math.nan for v, k in zip(x, ok, strict=True)])
    return np.where(ok, out, math.nan)


def _one(model: Callable[[FloatArray], object], value: float) -> float:
    try:
        return float(np.asarray(model(np.array([value])), dtype=np.float64)[0])
    except ModelInputError:
        return math.nan


def prediction_centre(spec: StepSpec, earlier: Mapping[str, FloatArray]) -> FloatArray | None:
    """What an ``ntc``, ``rtd`` or ``ratiometric`` step predicts, per sample (as the step kind
    computes it from the earlier steps it names); None for other kinds."""
    p = spec.params
    if spec.kind == "ratiometric":
        fraction = float(p["model"].fraction_at(float(p["pressure_pa"]))) * 100.0
        n = len(next(iter(earlier.values()))) if earlier else 1
        return np.full(n, fraction)
    temp = judged_at(spec, earlier)
    if temp is None:
        return None
    if spec.kind == "rtd":
        return model_or_nan(Rtd(r0_ohm=float(p["r0_ohm"])).r_at, temp, 25.0)
    r_pred = model_or_nan(p["model"].r_at, temp, 25.0)
    if p["mode"] == "resistance":
        return r_pred
    ref = p.get("reference_from")
    v_ref = earlier[ref] if ref else np.array([float(p["reference_v"])])
    # a sample with no temperature or no reference has no prediction either (NaN, as above)
    ok = np.isfinite(r_pred) & np.isfinite(v_ref) & (v_ref > 0.0)
    pullup = float(p["pullup_ohm"])
    v_pred = divider_voltage(np.where(ok, v_ref, 1.0), pullup, np.where(ok, r_pred, 1.0))
    return np.where(ok, np.asarray(v_pred, dtype=np.float64), math.nan)


def judged_at(spec: StepSpec, earlier: Mapping[str, FloatArray]) -> FloatArray | None:
    """The temperature an ``ntc`` or ``rtd`` step is judged at, per sample: the earlier step's
    value it names, or its stated temperature (one value for all); None for other kinds."""
    if spec.kind not in ("ntc", "rtd"):
        return None
    source = spec.params.get("temperature_from")
    return earlier[source] if source else np.array([float(spec.params["temperature_c"])])


def step_value(spec: StepSpec, readings: Mapping[str, FloatArray], station: Station) -> FloatArray:
    """The step's judged value from its readings, as its step kind computes it."""
    if spec.kind in ("resistance", "rtd"):
        raw = readings["hi-lo" if spec.kind == "resistance" else "rtd"]
        if spec.params.get("zero_ohm") is not None:
            return raw - float(spec.params["zero_ohm"])
        if spec.params.get("wires") == 4:
            return raw
        return raw - lead_zero_ohm(station, spec.pins["hi"], spec.pins["lo"])
    if spec.kind == "reference-temperature":
        r0 = float(spec.params["r0_ohm"])
        return model_or_nan(Rtd(r0_ohm=r0).t_at, readings["pt-4w"], r0)
    if spec.kind == "ratiometric":
        with np.errstate(divide="ignore", invalid="ignore"):
            return readings["output"] / readings["supply"] * 100.0
    if spec.kind == "ntc" and spec.params.get("mode") != "voltage":  # read 2-wire, as a run
        return readings["ntc"] - lead_zero_ohm(station, spec.pins["hi"], spec.pins["lo"])
    roles = reading_roles(spec) or ()
    return readings[roles[0]]


def figure_form(spec: StepSpec) -> tuple[str, str]:
    """(unit of the figure, form of the limits) of a step."""
    if spec.kind in ("ntc", "rtd"):
        tolerance = spec.params.get("tolerance")  # None: an rtd step's class, in ohm
        kind = "abs" if tolerance is None else tolerance[0]
        return ("%" if kind == "pct" else step_unit(spec)), "tolerance"
    if spec.kind == "ratiometric":
        return "%", "tolerance"
    if KINDS[spec.kind].small_is_good:
        return step_unit(spec), "magnitude"
    return step_unit(spec), "window"


def figure_of(spec: StepSpec, value: FloatArray, centre: FloatArray | None) -> FloatArray:
    """What a step's limits apply to: the value, or its deviation from the prediction."""
    if centre is None:
        return value
    tolerance = spec.params.get("tolerance") if spec.kind in ("ntc", "rtd") else None
    if tolerance is not None and tolerance[0] == "pct":
        return np.asarray((value - centre) / np.abs(centre) * 100.0, dtype=np.float64)
    return np.asarray(value - centre, dtype=np.float64)


def step_unit(spec: StepSpec) -> str:
    """The unit of a step's value, as its results carry it."""
    return str(spec.params.get("unit", KINDS[spec.kind].unit))


# --- the whole sequence -----------------------------------------------------------------------


class SequenceMonteCarlo:
    """The readings of a plan's steps across good units, ready to draw in blocks."""

    def __init__(self, plan: Plan, unit: UnitModel, nominal: Prediction) -> None:
        self.plan = plan
        self.unit = unit
        self.sampler = GoodUnitSampler(unit)
        self.skipped: dict[str, str] = {}
        self.no_meter_error: list[str] = []
        self.supply = SupplyOutput.of(plan.station)
        self.supply_exact: list[str] = []
        self._follows_supply: dict[tuple[Condition, float | None], bool] = {}
        self.readings: dict[tuple[str, str], ReadingModel] = {}
        self._steps: list[StepSpec] = []
        self.stated = stated_inputs(p.spec for p in plan.steps)
        self._stated_sensors: dict[str, tuple[str, float]] = {}
        """sensor -> the stated figure (quantity, value) whose draw moves it"""
        inputs = list({s.key: s for s in self.stated.values()}.values())
        self._pilot_moved = pilot_shifts(unit, inputs, 64)
        pilot = self.sampler.sample(np.random.default_rng(12345), 64, self._pilot_moved)
        self._pilot_position = np.random.default_rng(54321).uniform(-1.0, 1.0, pilot.n)
        bench = StaticBench(unit, plan.station.fixture, [])
        cache: dict[tuple[Condition, float | None], PortModel] = {}
        by_role = {(r.step_id, r.role): r for r in nominal.readings}
        nominal_values = {s.step_id: s.value for s in nominal.steps}
        for planned in plan.steps:
            spec = planned.spec
            reason = self._unsupported(spec, nominal_values.get(spec.id, math.nan))
            if reason is None:
                roles = reading_roles(spec) or ()
                missing = [r for r in roles if (spec.id, r) not in by_role]
                if missing:
                    reason = f"no {', '.join(missing)} reading in the prediction"
            if reason is not None:
                self.skipped[spec.id] = reason
                continue
            models = {}
            follows = False
            for role in roles:
                predicted = by_role[(spec.id, role)]
                model = self._port_model(bench, predicted, pilot, cache)
                follows |= self._follows_supply[(predicted.condition, predicted.range_)]
                if not math.isclose(model.m0, predicted.value, rel_tol=1e-6, abs_tol=1e-12):
                    reason = NOT_LINEAR
                    break
                function = predicted.condition.function
                assert function is not None
                meter = MeterError.for_reading(plan.station, function, predicted.range_)
                if meter is None:
                    self.no_meter_error.append(f"{spec.id}/{role}")
                models[(spec.id, role)] = ReadingModel(spec.id, role, model, meter)
            if reason is not None:
                self.skipped[spec.id] = reason
                continue
            self.readings.update(models)
            self._steps.append(spec)
            self._moved_by(spec, models.values())
            if follows and self.supply is None:
                self.supply_exact.append(spec.id)

    def _moved_by(self, spec: StepSpec, models: Iterable[ReadingModel]) -> None:
        """Tie the sensors a step's readings follow to its stated figure's draw (the first
        step in plan order to state one for a sensor holds it)."""
        stated = self.stated.get(spec.id)
        if stated is None:
            return
        for rm in models:
            for port in rm.model.ports:
                sensor = sensor_of(port.name, self.unit, stated.quantity)
                if sensor is not None:
                    self._stated_sensors.setdefault(sensor, stated.key)

    @property
    def stated_draws(self) -> list[StatedInput]:
        """The stated figures whose draw moves some sensor, once each."""
        used = set(self._stated_sensors.values())
        return list({s.key: s for s in self.stated.values() if s.key in used}.values())

    @staticmethod
    def _unsupported(spec: StepSpec, nominal_value: float) -> str | None:
        if spec.kind in SKIP_REASONS:
            return SKIP_REASONS[spec.kind]
        if reading_roles(spec) is None:
            return f"step kind {spec.kind!r} has no Monte Carlo model"
        if not math.isfinite(nominal_value):
            return "a good unit gives no reading here (see `rig coverage` for the nominal run)"
        return None

    def _port_model(
        self,
        bench: StaticBench,
        predicted: PredictedReading,
        pilot: Samples,
        cache: dict[tuple[Condition, float | None], PortModel],
    ) -> PortModel:
        cond = predicted.condition
        key = (cond, predicted.range_)
        if key in cache:
            return cache[key]
        function = cond.function
        assert function is not None
        circuit = prepared_circuit(bench, cond)
        sources = [n for n in pilot.values if n.startswith("src:")]
        ports = circuit_ports(circuit, [n for n in pilot.values if n not in sources])
        if cond.supply_on:  # the supply's output, within its setting accuracy
            sources.append(SUPPLY_ELEMENT)
            pilot = self._with_supply(pilot, cond.supply_v, self._pilot_position)
        full = PortModel.build(circuit, ports, sources, function, cond.test_current_a)
        self._follows_supply[key] = cond.supply_on and moves_with_supply(
            full.m0, float(full.b[-1]), cond.supply_v
        )
        u = predicted.u_std
        if not (math.isfinite(u) and u > 0):
            u = 1e-9 * max(abs(full.m0), 1e-6)  # no meter model: keep all but the negligible
        model = full.pruned(pilot, PRUNE_FRACTION * u)
        cache[key] = model
        return model

    def _with_supply(self, drawn: Samples, setting_v: float, position: FloatArray) -> Samples:
        """``drawn`` with the supply's output for ``setting_v`` (exact with no setting
        accuracy: the element is then pruned away)."""
        output = (
            np.full(drawn.n, setting_v)
            if self.supply is None
            else self.supply.drawn(setting_v, position)
        )
        return Samples(drawn.n, {**drawn.values, SUPPLY_ELEMENT: output}, drawn.ambient_c)

    def _inputs(
        self, model: PortModel, drawn: Samples, position: FloatArray
    ) -> Mapping[str, FloatArray]:
        """The drawn values a reading's model takes: the supply's output at its setting where
        the reading follows it."""
        if SUPPLY_ELEMENT not in model.sources:
            return drawn.values
        setting_v = float(model.vs0[model.sources.index(SUPPLY_ELEMENT)])
        return self._with_supply(drawn, setting_v, position).values

    def run(self, samples: int, seed: int, *, block: int = 20_000) -> MonteCarloResult:
        """Draw ``samples`` good units (in blocks, to bound memory) and every step's figure."""
        rng = np.random.default_rng(seed)
        parts: dict[str, list[tuple[FloatArray, FloatArray, FloatArray | None]]] = {
            s.id: [] for s in self._steps
        }
        done = 0
        while done < samples:
            n = min(block, samples - done)
            moved = None
            if self._pilot_moved:  # one true temperature or pressure per unit and stated figure
                inputs = self.stated_draws
                moved = drawn_shifts(rng, n, inputs, self._stated_sensors, self._pilot_moved)
            drawn = self.sampler.sample(rng, n, moved)
            # one supply, one position within its setting accuracy per unit, for every step
            position = np.zeros(n) if self.supply is None else rng.uniform(-1.0, 1.0, size=n)
            values: dict[str, FloatArray] = {}
            solved: dict[int, FloatArray] = {}  # readings on one route share the unit's state
            for spec in self._steps:
                readings = {}
                for role in reading_roles(spec) or ():
                    rm = self.readings[(spec.id, role)]
                    key = id(rm.model)
                    if key not in solved:
                        solved[key] = rm.model.evaluate(self._inputs(rm.model, drawn, position), n)
                    true = solved[key]
                    readings[role] = true if rm.meter is None else rm.meter.apply(true, rng)
                value = step_value(spec, readings, self.plan.station)
                values[spec.id] = value
                centre = prediction_centre(spec, values)
                temp = judged_at(spec, values)
                temp = None if temp is None else np.broadcast_to(temp, value.shape)
                parts[spec.id].append((value, figure_of(spec, value, centre), temp))
            done += n
        result = MonteCarloResult(
            samples,
            seed,
            list(self.sampler.draws),
            skipped=self.skipped,
            no_meter_error=list(self.no_meter_error),
            supply_exact=list(self.supply_exact),
        )
        if self.supply is not None and any(
            SUPPLY_ELEMENT in rm.model.sources for rm in self.readings.values()
        ):
            result.draws.append(self.supply.draw())
        result.draws += [s.draw() for s in self.stated_draws]
        for spec in self._steps:
            value = np.concatenate([v for v, _, _ in parts[spec.id]])
            figure = np.concatenate([f for _, f, _ in parts[spec.id]])
            temps = [t for _, _, t in parts[spec.id] if t is not None]
            judged = np.concatenate(temps) if temps else None
            unit, form = figure_form(spec)
            result.steps.append(StepDistribution(spec, value, figure, unit, form, judged))
        for (step_id, role), rm in self.readings.items():
            result.elements_per_reading[f"{step_id}/{role}"] = len(rm.model.ports) + len(
                rm.model.sources
            )
        return result
