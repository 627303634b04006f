"""Which single fault best explains a run: every measurement against every hypothesis.

Each hypothesis (no fault, or one fault of the unit's single-fault set) predicts every raw reading
of the run.  Its misfit is the sum of squared normalised residuals, (measured - predicted) / u, with
u each reading's own stated standard uncertainty.  Series resistance and sensor drift are fitted
(a log-spaced grid and zooms over a closed form that two batched solves fix, see
``rig.analysis.bench_model.OneParameter``), and pay an Occam factor for the fitted parameter
(Laplace approximation over a log-uniform prior).  With a prior per fault kind,
this gives a probability per hypothesis.  Hypotheses whose predictions no reading of the sequence
tells apart (every difference under one standard uncertainty) are reported as one group.
Every hypothesis is of a unit whose other parts lie anywhere inside their stated tolerances,
at the ambient within its measured uncertainty (``rig.analysis.good_spread``): the no-fault
hypothesis is a good unit, not the nominal one, so a unit that reads within tolerance is not put
down to a fitted drift, and a fault that reads as a good unit does not outrank it.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace

import numpy as np

from drivers.base import MeterFunction
from rig.analysis.bench_model import Condition, FloatArray, HypothesisBench, OneParameter
from rig.analysis.bench_model import Hypothesis as Candidate
from rig.analysis.fault_set import drifting_sensors, single_faults, where
from rig.analysis.good_spread import (
    Move,
    ambient_move,
    good_unit_misfit,
    tolerance_moves,
    widening,
)
from rig.analysis.predict import SequencePredictor
from rig.config.station import Station
from rig.config.unit_file import RtdSensor, UnitModel
from rig.errors import InterlockError
from rig.faults import Fault
from rig.plan import Plan
from rig.routing import Route, interlock_violations, relays_for
from rig.sim.sim_dmm import OVERRANGE_FACTOR, SPECS
from rig.step_judging import autorange_estimate, reading_u
from rig.store import ResultStore

PRIOR = {
    "none": 0.5,
    "open": 0.2,
    "short-ground": 0.15,
    "series": 0.2,
    "drift": 0.15,
    "short": 0.08,
    "short-ref": 0.05,
    "short-feed": 0.05,
}
"""Relative prior weight per candidate of each kind (our own rough figures, no published source:
breaks, chafes to ground and corroded pins are the usual harness faults)."""
SERIES_RANGE_OHM = (0.05, 1e5)
"""Fitted series resistance: below, a good wire; above, as good as open."""
DRIFT_RANGE_PCT = (1.0, 90.0)
"""Fitted drift magnitude, either way."""
RTD_DRIFT_FLOOR_PCT = 0.1
"""The smallest drift fitted on a platinum RTD: one 0.3 % off its curve (0.8 degC) is well
outside its IEC 60751 class B tolerance at room temperature (0.415 degC at 23 degC), while a few
% is the scale of an NTC's tolerance."""
GRID_POINTS = 41
ZOOM_POINTS = 9
ZOOM_LEVELS = 5
MISMATCH_CHI2 = 400.0
"""Squared residual when one side reads overload and the other does not (20 standard
uncertainties)."""
SLOPE_STEP = 1e-3
"""Step in a fitted fault's log-magnitude for the slope of the readings (central difference)."""
U_FALLBACK_REL = 1e-3
"""Relative uncertainty for a reading the station's table gives none."""


@dataclass(frozen=True)
class Hypothesis:
    spec: str
    """A fault spec (``rig.faults``), or ``none`` for a good unit."""
    probability: float
    where: str
    fitted: float | None
    """The fitted value (ohm for series, % for drift), None for other kinds."""
    same_as: tuple[str, ...] = ()
    """Faults this sequence cannot tell apart from this one (their probability is included)."""


@dataclass(frozen=True)
class Diagnosis:
    hypotheses: list[Hypothesis]
    next_check: str | None
    """The one extra reading that best separates the top two, in words."""


@dataclass(frozen=True)
class Measurement:
    """One settled raw reading of a run and what it was taken under."""

    step_id: str
    role: str
    value: float
    u_std: float
    condition: Condition
    range_: float | None


@dataclass
class _Scored:
    candidate: Candidate
    chi2: float
    log_weight: float
    predicted: FloatArray = field(repr=False)


class Diagnoser:
    """Diagnoses runs of one plan on one unit model; build once, reuse for many runs."""

    def __init__(self, plan: Plan, unit: UnitModel) -> None:
        self.plan = plan
        self.unit = unit
        self.predictor = SequencePredictor(plan, unit)
        self.faults = single_faults(unit, plan, series_ohm=1.0)
        shorts = [f for f in self.faults if f.kind.startswith("short")]
        self.bench = HypothesisBench(unit, plan.station.fixture, shorts)
        self.discrete = [Candidate("none")] + [
            Candidate(f.kind, f.targets) for f in self.faults if f.kind not in ("series", "drift")
        ]
        self.families = [_Family(Candidate("series", (w,)), 1.0) for w in unit.wires] + [
            _Family(Candidate("drift", (s,)), sign, _drift_floor(unit, s))
            for s in drifting_sensors(unit)
            for sign in (1.0, -1.0)
        ]
        self._template = self.predictor.run().readings
        self._extra_readings = _volts_routes(unit, plan)
        nominal = {name: e.value for name, e in self.bench.circuit.elements.items()}
        self._moves = tolerance_moves(unit, nominal)
        self._ambient_move = ambient_move(unit, nominal)

    # --- measurements -------------------------------------------------------------------------

    def measurements(self, readings: Sequence[dict[str, object]]) -> list[Measurement]:
        """The run's settled readings, each matched to the condition it was taken under."""
        settled: dict[tuple[str, str], dict[str, object]] = {}
        for row in readings:
            if row.get("settled"):
                settled[(str(row["step_id"]), str(row["role"]))] = row
        found = []
        for expected in self._template:
            found_row = settled.get((expected.step_id, expected.role))
            if found_row is None:
                continue
            value = _as_float(found_row.get("value"), found_row.get("overload"))
            if math.isnan(value):  # the meter gave no number: nothing to compare
                continue
            u = _as_float(found_row.get("u_std"), 0)
            condition = expected.condition
            fn = condition.function
            if fn in (MeterFunction.RES_2W, MeterFunction.RES_4W) and expected.range_ is None:
                condition = replace(condition, test_current_a=_test_current(fn, value))
            found.append(
                Measurement(expected.step_id, expected.role, value, u, condition, expected.range_)
            )
        return found

    # --- diagnosis ----------------------------------------------------------------------------

    def diagnose(
        self, measured: Sequence[Measurement], top: int = 5, ambient_u_c: float = 0.0
    ) -> Diagnosis:
        """The hypotheses, most likely first; ``ambient_u_c`` is the standard uncertainty of the
        ambient the model assumes (the measured one's, widened by any difference left)."""
        if not measured:
            return Diagnosis([], None)
        conditions = [m.condition for m in measured]
        values = np.array([m.value for m in measured])
        u = np.array([_u(m) for m in measured])
        ranges = [_overload_at(m.condition.function, m.range_) for m in measured]

        def chi2(predicted: FloatArray) -> FloatArray:
            return _chi2(values, u, ranges, predicted)

        curves = self.bench.curves([f.samples() for f in self.families], conditions)
        fits = self._fit(curves, chi2)
        candidates = self.discrete + [
            family.at(x) for family, (x, _) in zip(self.families, fits, strict=True)
        ]
        occam = [0.0] * len(self.discrete) + [penalty for _, penalty in fits]
        priors = [PRIOR[c.kind] for c in self.discrete] + [f.prior() for f in self.families]
        pred = self.bench.readings(candidates, conditions)  # exact, in one batch
        # every hypothesis is of a unit whose other parts lie anywhere inside their tolerances:
        # scored on the good unit's spread (misfit and Occam factor), so none of them, the good
        # unit least of all, is judged against a nominal unit no bench ever sees
        spreads = self._good_spreads(candidates, conditions, ambient_u_c)
        # a fitted fault's likelihood is wider where a tolerance can take up part of its effect
        # (an NTC drift of a few % against its R25 tolerance): its Occam factor with it
        start = len(self.discrete)
        for j, (family, (x, _)) in enumerate(zip(self.families, fits, strict=True)):
            ends = self.bench.readings(
                [family.at(x - SLOPE_STEP), family.at(x + SLOPE_STEP)], conditions
            )
            slope = (ends[1] - ends[0]) / (2 * SLOPE_STEP)
            inside = (
                np.isfinite(values)
                & np.isfinite(slope)
                & (np.abs(ends).max(axis=0) <= np.array(ranges))
            )
            wider = widening(slope[inside], u[inside], spreads[start + j][inside])
            occam[start + j] = min(0.0, occam[start + j] + wider)
        scored = []
        for candidate, row, prior, extra, spread in zip(
            candidates, pred, priors, occam, spreads, strict=True
        ):
            c2, spread_occam = _good_unit_chi2(values, u, ranges, row, spread)
            weight = -c2 / 2 + math.log(prior) + extra + spread_occam
            scored.append(_Scored(candidate, c2, weight, row))
        scored.sort(key=lambda s: -s.log_weight)
        logs = np.array([s.log_weight for s in scored])
        probs = np.exp(logs - logs.max())
        probs /= probs.sum()
        groups = _group(scored, list(probs), u, np.array(ranges))
        # ranked by each group's summed probability: a group of faults the readings cannot
        # tell apart may outweigh a likelier single hypothesis
        groups.sort(key=lambda g: -sum(p for _, p in g))
        hypotheses = [self._hypothesis(g) for g in groups[:top]]
        # the top two: within the leading group when this sequence cannot split it
        leaders = [item for item, _ in groups[0][:2]] if len(groups[0]) > 1 else []
        if not leaders and len(groups) > 1:
            leaders = [groups[0][0][0], groups[1][0][0]]
        next_check = None
        if leaders:
            next_check = self._separating_reading(leaders[0], leaders[1], conditions)
        return Diagnosis(hypotheses, next_check)

    def _good_spreads(
        self, candidates: list[Candidate], conditions: list[Condition], ambient_u_c: float
    ) -> FloatArray:
        """J per hypothesis: each reading's change over one standard uncertainty of each
        tolerance, and of the ambient, with the hypothesis in place (candidates x readings x
        moves), by central differences in one batched solve.  A move of an element the
        hypothesis changes scales the hypothesis's value by the same ratio."""
        moves: list[tuple[Move, float]] = [(m, 1.0) for m in self._moves]
        if ambient_u_c > 0 and self._ambient_move:
            moves.append((self._ambient_move, ambient_u_c))  # per kelvin, times u
        if not moves:
            return np.zeros((len(candidates), len(conditions), 0))
        nominal = self.bench.circuit.elements
        states = []
        for candidate in candidates:
            base = self.bench.element_values(candidate)
            for move, _ in moves:
                for side in (0, 1):
                    state = dict(base)
                    for e, pair in move.items():
                        at = nominal[e].value
                        state[e] = base.get(e, at) * pair[side] / at if at else pair[side]
                    states.append(state)
        y = self.bench.readings_of(states, conditions)
        y = y.reshape(len(candidates), len(moves), 2, len(conditions))
        scale = np.array([s for _, s in moves])[None, :, None]
        found = ((y[:, :, 1] - y[:, :, 0]) / 2 * scale).transpose(0, 2, 1)
        return np.asarray(np.where(np.isfinite(found), found, 0.0), dtype=np.float64)

    def _fit(
        self, curves: list[OneParameter], chi2: Callable[[FloatArray], FloatArray]
    ) -> list[tuple[float, float]]:
        """Best log-magnitude of each parametric fault and its Occam factor (log): a grid, a
        few zooms, then the vertex of a parabola through the best three points.  Every value
        comes in closed form, every family at once."""
        if not self.families:
            return []
        elements = [self.bench.parametric_element(f.base) for f in self.families]
        bases = [self.bench.circuit.elements[e].value for e in elements]
        low, high = np.array([f.bounds() for f in self.families]).T

        def misfit(grids: FloatArray) -> FloatArray:
            rows = [
                curve.readings(self.bench.matrix_parameter(e, family.values(base, xs)))
                for curve, e, family, base, xs in zip(
                    curves, elements, self.families, bases, grids, strict=True
                )
            ]
            return chi2(np.concatenate(rows)).reshape(grids.shape)

        grids = np.linspace(low, high, GRID_POINTS, axis=1)
        for _ in range(ZOOM_LEVELS):
            c2 = misfit(grids)
            k = np.argmin(c2, axis=1)
            step = grids[:, 1] - grids[:, 0]
            best_x = grids[np.arange(len(k)), k]
            best_c2 = c2[np.arange(len(k)), k]
            curvature = [
                _curvature(row, int(j), float(h)) for row, j, h in zip(c2, k, step, strict=True)
            ]
            vertex = np.array(
                [_vertex(row, g, int(j)) for row, g, j in zip(c2, grids, k, strict=True)]
            )
            grids = np.linspace(
                np.maximum(low, best_x - step), np.minimum(high, best_x + step), ZOOM_POINTS, axis=1
            )
        at_vertex = misfit(vertex[:, None])[:, 0]
        found = []
        for j, width in enumerate(high - low):
            x = float(vertex[j] if at_vertex[j] < best_c2[j] else best_x[j])
            sigma = math.sqrt(2 / curvature[j]) if curvature[j] > 0 else width
            found.append((x, min(0.0, math.log(math.sqrt(2 * math.pi) * sigma / width))))
        return found

    def _hypothesis(self, group: list[tuple[_Scored, float]]) -> Hypothesis:
        lead = group[0][0].candidate
        fixture = self.plan.station.fixture
        fault = lead.fault()
        value = None if lead.value is None else float(f"{lead.value:.3g}")
        if fault is not None:
            fault = Fault(fault.kind, fault.targets, value)
        return Hypothesis(
            spec="none" if fault is None else fault.spec,
            probability=float(sum(p for _, p in group)),
            where="no fault: every reading as a good unit"
            if fault is None
            else where(fault, self.unit, fixture),
            fitted=value,
            same_as=tuple(_spec(s.candidate) for s, _ in group[1:]),
        )

    def _separating_reading(
        self, first: _Scored, second: _Scored, measured: list[Condition]
    ) -> str | None:
        """The DC volts reading between two unit pins whose predictions under the top two
        hypotheses differ by the most standard uncertainties."""
        taken = {(c.relays, c.function) for c in measured}
        routes = [
            (hi, lo) for hi, lo, c in self._extra_readings if (c.relays, c.function) not in taken
        ]
        conditions = [c for _, _, c in self._extra_readings if (c.relays, c.function) not in taken]
        if not conditions:
            return None
        pred = self.bench.readings([first.candidate, second.candidate], conditions)
        station = self.plan.station
        best, best_z = -1, 0.0
        for k, (a, b) in enumerate(zip(pred[0], pred[1], strict=True)):
            ua = reading_u(station, MeterFunction.DC_VOLTS, a, _range(station, a))
            ub = reading_u(station, MeterFunction.DC_VOLTS, b, _range(station, b))
            u = math.hypot(ua, ub)
            if math.isfinite(u) and u > 0 and abs(a - b) / u > best_z:
                best, best_z = k, abs(a - b) / u
        if best < 0 or best_z < 1:
            return None
        hi, lo = routes[best]
        a, b = pred[0][best], pred[1][best]
        return (
            f"DC volts {hi} to {lo}: {a:.4g} V if {_spec(first.candidate)}, "
            f"{b:.4g} V if {_spec(second.candidate)}"
        )


@dataclass(frozen=True)
class _Family:
    """A parametric fault fitted over the natural log of its magnitude (ohm, or % of drift)."""

    base: Candidate
    sign: float
    floor: float | None = None
    """The smallest magnitude fitted, where not the kind's own (``_drift_floor``)."""

    def bounds(self) -> tuple[float, float]:
        low, high = SERIES_RANGE_OHM if self.base.kind == "series" else DRIFT_RANGE_PCT
        return math.log(low if self.floor is None else self.floor), math.log(high)

    def at(self, x: float) -> Candidate:
        return replace(self.base, value=self.sign * math.exp(x))

    def values(self, base: float, xs: FloatArray) -> FloatArray:
        """The changed element's value at each log-magnitude (series adds ohms, drift scales);
        as ``rig.unit_circuit`` applies these faults."""
        amounts = self.sign * np.exp(xs)
        if self.base.kind == "series":
            return np.asarray(base + amounts, dtype=np.float64)
        return np.asarray(base * (1 + amounts / 100), dtype=np.float64)

    def samples(self) -> tuple[Candidate, Candidate]:
        """Two hypotheses of this family, a quarter and three quarters along its range."""
        low, high = self.bounds()
        return self.at(low + (high - low) / 4), self.at(low + 3 * (high - low) / 4)

    def prior(self) -> float:
        share = 0.5 if self.base.kind == "drift" else 1.0  # drift: half each way
        return PRIOR[self.base.kind] * share


def _drift_floor(unit: UnitModel, sensor: str) -> float | None:
    """``RTD_DRIFT_FLOOR_PCT`` for a platinum RTD, whose class is a fraction of a %; None (the
    kind's own floor) for other sensors."""
    return RTD_DRIFT_FLOOR_PCT if isinstance(unit.sensors[sensor], RtdSensor) else None


_RECENT: list[tuple[Plan, UnitModel, float, Diagnoser]] = []
"""Diagnosers of the last few (plan, unit, ambient): a console diagnoses many runs of one plan.
The plan and unit are held with their diagnoser, so the objects compared by identity stay
alive."""
RECENT_KEPT = 4
AMBIENT_SHIFT_U = 4.0
"""A measured ambient this many of its standard uncertainties away from the unit file's replaces
it in the model (a bench is rarely at the temperature its unit file states)."""


def diagnose_run(store: ResultStore, run_id: int, unit: UnitModel, plan: Plan) -> Diagnosis:
    """Diagnose a stored run of ``plan`` on a unit described by ``unit``, at the ambient the run
    measured when that is clearly not the unit file's."""
    ambient = measured_ambient(plan, store.steps(run_id))
    if ambient is None:
        ambient_c = unit.ambient_c
    else:
        temp_c, u_c = ambient
        shifted = abs(temp_c - unit.ambient_c) > AMBIENT_SHIFT_U * u_c
        ambient_c = temp_c if shifted else unit.ambient_c
    diagnoser = next(
        (d for p, u, t, d in _RECENT if p is plan and u is unit and t == ambient_c), None
    )
    if diagnoser is None:
        model = unit if ambient_c == unit.ambient_c else replace(unit, ambient_c=ambient_c)
        diagnoser = Diagnoser(plan, model)
        _RECENT.insert(0, (plan, unit, ambient_c, diagnoser))
        del _RECENT[RECENT_KEPT:]
    ambient_u = 0.0 if ambient is None else math.hypot(ambient[1], ambient[0] - ambient_c)
    return diagnoser.diagnose(diagnoser.measurements(store.readings(run_id)), ambient_u_c=ambient_u)


def measured_ambient(plan: Plan, steps: Sequence[dict[str, object]]) -> tuple[float, float] | None:
    """The run's first reference-temperature result (degC) and its standard uncertainty."""
    kinds = {p.spec.id: p.spec.kind for p in plan.steps}
    for row in steps:
        if kinds.get(str(row.get("step_id"))) != "reference-temperature":
            continue
        value, u = _as_float(row.get("value"), 0), _as_float(row.get("u_std"), 0)
        if math.isfinite(value) and math.isfinite(u) and u > 0:
            return value, u
    return None


# --- helpers ----------------------------------------------------------------------------------


def _volts_routes(unit: UnitModel, plan: Plan) -> list[tuple[str, str, Condition]]:
    """Every DC volts reading between two pins of the harness that the fixture can route
    without breaking an interlock: the candidates for the one extra reading."""
    fixture = plan.station.fixture
    pins = sorted(p for p in harness_nodes(unit) if p in fixture.pins)
    found = []
    for i, hi in enumerate(pins):
        for lo in pins[i + 1 :]:
            try:
                relays = relays_for(fixture, Route.dmm(hi, lo))
            except InterlockError:  # a pin the DMM cannot reach
                continue
            if not interlock_violations(fixture, relays):
                found.append((hi, lo, Condition(relays, MeterFunction.DC_VOLTS)))
    return found


def harness_nodes(unit: UnitModel) -> set[str]:
    """The unit's nodes without the bench's reference probe: where an extra reading helps."""
    probe = unit.probe
    leads = (
        set() if probe is None else {probe.force_hi, probe.sense_hi, probe.force_lo, probe.sense_lo}
    )
    return unit.nodes() - leads


def _spec(candidate: Candidate) -> str:
    fault = candidate.fault()
    if fault is None:
        return "none"
    value = None if candidate.value is None else float(f"{candidate.value:.3g}")
    return Fault(fault.kind, fault.targets, value).spec


def _as_float(value: object, overload: object) -> float:
    """A stored number; the store keeps an overload (flag 1) or no number (flag 2) as a flag
    beside an empty value, and loses the overload's sign (the misfit does not need it)."""
    if not isinstance(value, int | float):
        return math.inf if overload == 1 else math.nan
    number = float(value)
    if overload and math.isfinite(number):
        return math.copysign(math.inf, number)
    return number


def _test_current(function: MeterFunction, value: float) -> float:
    spec = SPECS[function]
    chosen = next((r for r in spec.ranges if math.isfinite(value) and abs(value) <= r), None)
    return spec.test_current(chosen if chosen is not None else spec.ranges[-1])


def _overload_at(function: MeterFunction | None, range_: float | None) -> float:
    if function is None:
        return math.inf
    spec = SPECS[function]
    if range_ is None:
        return spec.ranges[-1] * OVERRANGE_FACTOR
    return next((r for r in spec.ranges if abs(range_) <= r), spec.ranges[-1]) * OVERRANGE_FACTOR


def _u(m: Measurement) -> float:
    if math.isfinite(m.u_std) and m.u_std > 0:
        return m.u_std
    return max(abs(m.value) * U_FALLBACK_REL, 1e-9) if math.isfinite(m.value) else 1.0


def _range(station: Station, value: float) -> float | None:
    return autorange_estimate(station, MeterFunction.DC_VOLTS, value)


def _good_unit_chi2(
    values: FloatArray,
    u: FloatArray,
    overload: list[float],
    predicted: FloatArray,
    spread: FloatArray,
) -> tuple[float, float]:
    """The good unit's misfit and log Occam factor (``good_unit_misfit``) over the readings
    that both it and the meter give a number for; the others as ``_chi2`` scores them."""
    z2 = _z2(values, u, overload, predicted[None, :])[0]
    inside = np.isfinite(values) & (np.abs(predicted) <= np.array(overload))
    chi2, occam = good_unit_misfit((values - predicted)[inside], u[inside], spread[inside])
    total = chi2 + float(z2[~inside].sum())
    return (total if math.isfinite(total) else math.inf), occam


def _chi2(
    values: FloatArray, u: FloatArray, overload: list[float], predicted: FloatArray
) -> FloatArray:
    """Sum of squared normalised residuals per hypothesis row (``_z2``), inf where not a
    number."""
    total = _z2(values, u, overload, predicted).sum(axis=1)
    return np.asarray(np.where(np.isnan(total), np.inf, total), dtype=np.float64)


def _z2(
    values: FloatArray, u: FloatArray, overload: list[float], predicted: FloatArray
) -> FloatArray:
    """Squared normalised residual per hypothesis row and reading.  Overload is a state: both over
    agree; one over and one not costs at least ``MISMATCH_CHI2`` and at least the distance of the
    finite side to the overload level, so a fit never escapes into overload."""
    limit = np.array(overload)[None, :]
    pred_over = np.abs(predicted) > limit
    meas_over = ~np.isfinite(values)[None, :]
    finite = np.where(meas_over, 0.0, values[None, :])
    z2 = ((finite - predicted) / u) ** 2
    to_limit_meas = ((limit - np.abs(finite)) / u) ** 2
    with np.errstate(divide="ignore", invalid="ignore"):  # a level of 0 or none known
        to_limit_pred = ((limit - np.abs(predicted)) / (U_FALLBACK_REL * limit)) ** 2
    to_limit_pred = np.where(np.isfinite(to_limit_pred), to_limit_pred, MISMATCH_CHI2)
    z2 = np.where(pred_over & ~meas_over, np.maximum(MISMATCH_CHI2, to_limit_meas), z2)
    z2 = np.where(meas_over & ~pred_over, np.maximum(MISMATCH_CHI2, to_limit_pred), z2)
    return np.asarray(np.where(meas_over & pred_over, 0.0, z2), dtype=np.float64)


def _curvature(values: FloatArray, k: int, step: float) -> float:
    """Second difference of chi2 at index k (one-sided at the ends)."""
    if len(values) < 3 or step <= 0:
        return 0.0
    k = min(max(k, 1), len(values) - 2)
    return float((values[k + 1] + values[k - 1] - 2 * values[k]) / step**2)


def _vertex(values: FloatArray, grid: FloatArray, k: int) -> float:
    """Where a parabola through grid point k and its neighbours has its minimum, kept within
    one step; the grid point itself when the three make no upward parabola."""
    if not 0 < k < len(values) - 1:
        return float(grid[k])
    step = float(grid[1] - grid[0])
    bend = values[k + 1] - 2 * values[k] + values[k - 1]
    if bend <= 0:
        return float(grid[k])
    shift = 0.5 * step * (values[k - 1] - values[k + 1]) / bend
    return float(grid[k] + max(-step, min(step, shift)))


def _group(
    scored: list[_Scored], probs: list[float], u: FloatArray, overload: FloatArray
) -> list[list[tuple[_Scored, float]]]:
    """Hypotheses in order of probability; those no reading tells apart share a group: every
    reading's predictions differ by under one standard uncertainty (overload matches overload)."""
    pred = np.array([s.predicted for s in scored])
    over = np.abs(pred) > overload
    diff = np.abs(pred[:, None, :] - pred[None, :, :]) / u
    diff = np.where(over[:, None, :] & over[None, :, :], 0.0, diff)
    alike = diff.max(axis=2) < 1.0
    groups: list[list[tuple[_Scored, float]]] = []
    leads: list[int] = []
    for index, (item, p) in enumerate(zip(scored, probs, strict=True)):
        home = next((g for g, lead in enumerate(leads) if alike[lead, index]), None)
        if home is None:
            leads.append(index)
            groups.append([(item, p)])
        else:
            groups[home].append((item, p))
    return groups
