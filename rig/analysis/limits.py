"""Limits proposed from the Monte Carlo of good units, and which faults they still catch.

A step's limits reject a good unit when its figure (the value, or its deviation from the step's
prediction) falls outside them, under either decision rule: a guarded verdict inside the limits is
at worst a conditional pass.  So the false-reject rate of limits is the share of good units outside
them, and limits for a target rate are quantiles of the good units' figure: for window limits the
target is split evenly between the two tails; a ± tolerance is the quantile of the deviation's
magnitude at 1 - target.

Tails with few samples are not read off the sample.  A quantile is taken from the sample (linear
interpolation between order statistics) only when at least ``MIN_TAIL`` samples lie beyond it;
further out it is extrapolated along a straight line on a normal probability plot through the
empirical quantiles at ``MIN_TAIL / N`` and ten times that.  A normal tail is met exactly; a tail
that is bounded (sums of uniform tolerances) is lighter than that line, so the limit comes out a
little wide and the real rate below the target.

Pure computation: the caller loads the files and hands in the plan and the unit.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Sequence
from dataclasses import dataclass, field, replace
from statistics import NormalDist

import numpy as np
import numpy.typing as npt

from rig.analysis.fault_set import DETECTING, single_faults
from rig.analysis.model_tur import MODEL_KINDS, model_step_turs
from rig.analysis.montecarlo import (
    FloatArray,
    MonteCarloResult,
    SequenceMonteCarlo,
    StepDistribution,
    figure_of,
    model_or_nan,
    prediction_centre,
)
from rig.analysis.predict import SequencePredictor, StepPrediction
from rig.analysis.stated_inputs import stated_u_names
from rig.analysis.supply_output import exact_output_warning
from rig.config.unit_file import UnitModel
from rig.faults import Fault
from rig.judge.decision import TUR_MINIMUM, Limits, Verdict, tur_is_low, tur_text
from rig.models._common import ModelInputError
from rig.models.rtd import Rtd
from rig.plan import Plan, held_range
from rig.quantity import parse_quantity
from rig.step_judging import uncertainty_at_limit
from rig.steps import StepSpec

MIN_TAIL = 200
"""Samples that must lie beyond an empirical quantile before it is used as it is."""
FAR = 10.0
"""The second point of the tail line lies at this many times the first one's probability."""
DIGITS = 4
"""Significant digits of a proposed limit, rounded outward (never tighter than computed)."""

ROOM_SHIFT_C = 5.0
"""How far from the unit file's ambient a room is taken to be when the file states no range:
a few degrees, as between a morning and an afternoon on a shop floor (our own choice)."""

EMPIRICAL = "empirical"
EXTRAPOLATED = "normal-plot tail extrapolation"
NORMAL_FIT = "normal fit (mean, standard deviation): too few samples for the tail"

_Z = NormalDist()


@dataclass(frozen=True)
class Quantile:
    value: float
    method: str


def tail_quantile(x: FloatArray, p: float) -> Quantile:
    """The quantile of ``x`` at probability ``p`` (0 < p < 1), estimated as the module says."""
    if not 0.0 < p < 1.0:
        raise ValueError(f"p = {p!r}: expected a probability strictly between 0 and 1")
    data = np.asarray(x, dtype=np.float64)
    data = data[np.isfinite(data)]
    n = len(data)
    if n < 2:
        raise ValueError(f"a quantile needs at least 2 finite samples, found {n}")
    if min(p, 1.0 - p) * n >= MIN_TAIL:
        return Quantile(float(np.quantile(data, p)), EMPIRICAL)
    p1 = MIN_TAIL / n
    p2 = FAR * p1
    if p2 >= 0.5:
        mean, sd = float(np.mean(data)), float(np.std(data, ddof=1))
        return Quantile(mean + sd * _Z.inv_cdf(p), NORMAL_FIT)
    if p > 0.5:
        p1, p2 = 1.0 - p1, 1.0 - p2
    q1, q2 = (float(v) for v in np.quantile(data, [p1, p2]))
    z1, z2 = _Z.inv_cdf(p1), _Z.inv_cdf(p2)
    slope = max((q1 - q2) / (z1 - z2), 0.0)
    return Quantile(q1 + slope * (_Z.inv_cdf(p) - z1), EXTRAPOLATED)


# --- limits on a step's figure ----------------------------------------------------------------


@dataclass(frozen=True)
class FigureLimits:
    """Limits on a step's figure, inclusive; None is no limit on that side."""

    low: float | None
    high: float | None

    def outside(self, figure: FloatArray) -> npt.NDArray[np.bool_]:
        """True where a figure is rejected (NaN, no reading, is always rejected)."""
        low = -np.inf if self.low is None else self.low
        high = np.inf if self.high is None else self.high
        return np.asarray(~((figure >= low) & (figure <= high)), dtype=np.bool_)


@dataclass(frozen=True)
class ClassLimits:
    """An rtd step's IEC 60751 class on its figure (ohm off the prediction): ± the class's
    tolerance through the curve's slope at the temperature each drawn unit is judged at, as a
    run computes it for its one unit (``Rtd.class_tolerance_ohm``)."""

    tolerance_class: str
    half_width: FloatArray
    """ohm, per drawn unit; NaN where a unit gives no temperature (it is rejected anyway)."""

    def outside(self, figure: FloatArray) -> npt.NDArray[np.bool_]:
        """True where a figure is rejected (NaN, no reading, is always rejected)."""
        with np.errstate(invalid="ignore"):
            return np.asarray(~(np.abs(figure) <= self.half_width), dtype=np.bool_)

    @property
    def span(self) -> tuple[float, float]:
        """The narrowest and widest ± over the drawn units (NaN where none has one)."""
        finite = self.half_width[np.isfinite(self.half_width)]
        if not len(finite):
            return math.nan, math.nan
        return float(np.min(finite)), float(np.max(finite))


def class_limits(spec: StepSpec, judged_at_c: FloatArray) -> ClassLimits:
    """An rtd step's class limits at the temperatures its drawn units are judged at."""
    cls = spec.params["tolerance_class"]
    rtd = Rtd(r0_ohm=float(spec.params["r0_ohm"]))
    half = model_or_nan(lambda t: rtd.class_tolerance_ohm(t, cls), judged_at_c, 25.0)
    return ClassLimits(str(cls), half)


def present_limits(
    spec: StepSpec, judged_at_c: FloatArray | None = None
) -> FigureLimits | ClassLimits | None:
    """The sequence's own limits, on the step's figure; an rtd step's class at the temperatures
    ``judged_at_c`` (None without them)."""
    if spec.kind == "rtd" and spec.params.get("tolerance_class") is not None:
        return None if judged_at_c is None else class_limits(spec, judged_at_c)
    if spec.kind in ("ntc", "rtd"):
        tolerance = spec.params.get("tolerance")
        return None if tolerance is None else FigureLimits(-tolerance[1], tolerance[1])
    if spec.kind == "ratiometric":
        tol = spec.params.get("tolerance_pct")
        return None if tol is None else FigureLimits(-float(tol), float(tol))
    if spec.limits is None:
        return None
    return FigureLimits(spec.limits.low, spec.limits.high)


def round_out(value: float, unit: str, *, up: bool) -> tuple[float, str]:
    """``value`` rounded away from the figures' centre to ``DIGITS`` significant digits, as the
    text a sequence file takes, and the number that text reads back as."""
    if value == 0.0 or not math.isfinite(value):
        text = f"0 {unit}"
        return parse_quantity(text, unit), text
    exponent = 0
    prefix = ""
    if unit not in ("%", "degC", "K"):
        exponent = max(-12, min(9, int(math.floor(math.log10(abs(value)) / 3) * 3)))
        prefix = {-12: "p", -9: "n", -6: "u", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}[exponent]
    mantissa = value / 10.0**exponent
    scale = 10.0 ** (DIGITS - 1 - math.floor(math.log10(abs(mantissa))))
    rounded = (math.ceil if up else math.floor)(mantissa * scale - (1e-9 if up else -1e-9)) / scale
    text = f"{rounded:.{DIGITS + 2}g} {prefix}{unit}"
    return parse_quantity(text, unit), text


@dataclass
class Proposal:
    """Proposed limits for one step, with what they are based on."""

    step_id: str
    kind: str
    form: str
    figure_unit: str
    limits: FigureLimits
    toml: dict[str, str]
    """The keys to paste into the step's ``[[steps]]`` table."""
    method: str
    mean: float
    sd: float
    reach: FigureLimits
    """The tightest limits any choice could have on each side alone while holding the target:
    a fault beyond them can be caught by some limit, one inside them by none."""
    present: FigureLimits | ClassLimits | None
    present_rejects: int
    proposed_rejects: int
    samples: int
    no_reading: int
    tur: float | None = None
    """The test uncertainty ratio of the proposed limits as ``rig check`` would show it once
    they are pasted (None where it shows none: a one-sided limit, a reading no listed range
    holds, or limits around a prediction other than an ntc step's)."""
    tur_at_c: float | None = None
    """For limits around an ntc step's prediction, the ambient the TUR is taken at: the worst
    end of the unit file's temperature range (``rig.analysis.model_tur``)."""
    tur_dominant: str | None = None
    """The stated input (``temperature``, ``pressure``, ``reference``) whose u makes up most of
    the U that TUR is taken with, if one does: the advice is then to state it more closely."""

    @property
    def present_ppm(self) -> float:
        return self.present_rejects / self.samples * 1e6

    @property
    def proposed_ppm(self) -> float:
        return self.proposed_rejects / self.samples * 1e6


def propose(dist: StepDistribution, false_reject_ppm: float) -> Proposal:
    """Limits on ``dist``'s figure that reject about ``false_reject_ppm`` of good units."""
    if not 0.0 < false_reject_ppm < 1e6:
        raise ValueError(f"false-reject target {false_reject_ppm!r} ppm: expected 0 to 1e6 ppm")
    alpha = false_reject_ppm / 1e6
    figure = dist.figure
    finite = figure[np.isfinite(figure)]
    spec = dist.spec
    unit = dist.figure_unit
    if dist.form == "window":
        low_q = tail_quantile(finite, alpha / 2)
        high_q = tail_quantile(finite, 1 - alpha / 2)
        low, low_text = round_out(low_q.value, unit, up=False)
        high, high_text = round_out(high_q.value, unit, up=True)
        limits = FigureLimits(low, high)
        toml = {"low": low_text, "high": high_text}
        method = _method(low_q, high_q)
        reach = FigureLimits(
            tail_quantile(finite, alpha).value, tail_quantile(finite, 1 - alpha).value
        )
    else:  # a bound on the size: around the prediction ("tolerance") or around zero ("max")
        need = tail_quantile(np.abs(finite), 1 - alpha)
        tol, tol_text = round_out(need.value, unit, up=True)
        limits = FigureLimits(-tol, tol)
        toml = {"max" if dist.form == "magnitude" else "tolerance": tol_text}
        method = need.method
        reach = FigureLimits(-need.value, need.value)
    present = present_limits(spec, dist.judged_at_c)
    return Proposal(
        step_id=spec.id,
        kind=spec.kind,
        form=dist.form,
        figure_unit=unit,
        limits=limits,
        toml=toml,
        method=method,
        mean=float(np.mean(finite)),
        sd=float(np.std(finite, ddof=1)),
        reach=reach,
        present=present,
        present_rejects=0 if present is None else int(present.outside(figure).sum()),
        proposed_rejects=int(limits.outside(figure).sum()),
        samples=len(figure),
        no_reading=len(figure) - len(finite),
    )


def _method(low: Quantile, high: Quantile) -> str:
    return low.method if low.method == high.method else f"{low.method} / {high.method}"


# --- faults -----------------------------------------------------------------------------------


@dataclass(frozen=True)
class FaultCheck:
    """One fault against one step: its figure, and whether each set of limits rejects it."""

    fault: Fault
    figure: float
    present: bool
    proposed: bool
    catchable: bool
    """Some limit that holds the false-reject target would reject it."""


def fault_figures(
    plan: Plan, predictions: Sequence[StepPrediction]
) -> dict[str, tuple[float, Verdict]]:
    """Each step's figure and predicted verdict, from one prediction of the whole plan."""
    values: dict[str, FloatArray] = {}
    found: dict[str, tuple[float, Verdict]] = {}
    by_id = {p.step_id: p for p in predictions}
    for planned in plan.steps:
        spec = planned.spec
        prediction = by_id[spec.id]
        value = np.array([prediction.value], dtype=np.float64)
        values[spec.id] = value
        centre = None
        if spec.kind in ("ntc", "rtd", "ratiometric"):
            try:
                with np.errstate(all="ignore"):
                    centre = prediction_centre(spec, values)
            except ModelInputError:  # an earlier step read nothing usable: no prediction
                centre = np.array([math.nan])
        with np.errstate(all="ignore"):
            figure = float(figure_of(spec, value, centre)[0])
        found[spec.id] = (figure, prediction.verdict)
    return found


def check_fault(proposal: Proposal, figure: float, verdict: Verdict, fault: Fault) -> FaultCheck:
    if verdict is Verdict.SKIPPED:  # an earlier step could not measure: this one never ran
        return FaultCheck(fault, figure, False, False, False)
    stopped = verdict is Verdict.ERROR  # the step could not measure: caught whatever the limits
    value = np.array([figure])
    return FaultCheck(
        fault,
        figure,
        verdict in DETECTING,
        stopped or bool(proposal.limits.outside(value)[0]),
        stopped or bool(proposal.reach.outside(value)[0]),
    )


# --- the whole study --------------------------------------------------------------------------


@dataclass
class LimitsStudy:
    result: MonteCarloResult
    false_reject_ppm: float
    proposals: list[Proposal]
    faults: list[Fault]
    checks: dict[str, list[FaultCheck]] = field(default_factory=dict)
    """step id -> one check per fault, in fault-set order"""
    warnings: list[str] = field(default_factory=list)
    not_studied: list[str] = field(default_factory=list)
    """The plan's steps that ``--step`` left out, in plan order: a fault no studied step catches
    may well be caught by one of them."""

    @property
    def no_step(self) -> str:
        """Who catches none of the faults listed against it: every step, or the studied ones."""
        return "no studied step" if self.not_studied else "no step"

    def caught_by_any(self, which: str) -> set[Fault]:
        """Faults that some step rejects with the ``present`` or ``proposed`` limits."""
        return {c.fault for checks in self.checks.values() for c in checks if getattr(c, which)}


NOT_PROPOSED = {
    "reference-temperature": (
        "the bench's own reference probe: its limits state the temperatures the sequence holds "
        "for, not a property of the unit to screen"
    ),
}
"""Kinds drawn with the rest (others depend on their values) but given no proposed limits."""


def study_limits(
    plan: Plan,
    unit: UnitModel,
    *,
    samples: int,
    seed: int,
    false_reject_ppm: float = 100.0,
    faults: Sequence[Fault] | None = None,
    only: Sequence[str] | None = None,
) -> LimitsStudy:
    """Draw good units, propose limits per step (or per step of ``only``), and check them
    against the fault set (default: ``rig.analysis.fault_set.single_faults``)."""
    if samples < 2:
        raise ValueError(f"samples = {samples}: expected at least 2")
    predictor = SequencePredictor(plan, unit)
    nominal = predictor.run()
    result = SequenceMonteCarlo(plan, unit, nominal).run(samples, seed)
    for dist in result.steps:
        if dist.spec.kind in NOT_PROPOSED:
            result.skipped[dist.spec.id] = NOT_PROPOSED[dist.spec.kind]
    proposals = [
        propose(dist, false_reject_ppm)
        for dist in result.steps
        if dist.spec.kind not in NOT_PROPOSED and (only is None or dist.spec.id in only)
    ]
    for proposal in proposals:
        proposal.tur = proposed_tur(plan, proposal)
    _model_turs(plan, unit, proposals)
    fault_list = list(single_faults(unit, plan) if faults is None else faults)
    study = LimitsStudy(result, false_reject_ppm, proposals, fault_list)
    if only is not None:
        study.not_studied = [p.spec.id for p in plan.steps if p.spec.id not in only]
    figures = [fault_figures(plan, predictor.predict([f])) for f in fault_list]
    for proposal in proposals:
        study.checks[proposal.step_id] = [
            check_fault(proposal, *found[proposal.step_id], fault)
            for fault, found in zip(fault_list, figures, strict=True)
        ]
    exact = result.supply_exact
    study.warnings = (
        _ambient_warnings(plan, unit, proposals)
        + ([exact_output_warning(exact, plan.station)] if exact else [])
        + _warnings(study)
    )
    return study


def proposed_tur(plan: Plan, proposal: Proposal) -> float | None:
    """The TUR ``rig check`` would show for the step with the proposed limits pasted: U at the
    upper limit on the range the planner would then hold (``uncertainty_at_limit``)."""
    if proposal.form == "tolerance":  # around the prediction: not in the meter's unit
        return None
    spec = next(p.spec for p in plan.steps if p.spec.id == proposal.step_id)
    pasted = replace(spec, limits=Limits(proposal.limits.low, proposal.limits.high))
    earlier = {p.spec.id: p.spec for p in plan.steps}.get
    found = uncertainty_at_limit(plan.station, pasted, held_range(pasted, earlier, plan.station))
    return None if found is None else found[1]


def _model_turs(plan: Plan, unit: UnitModel, proposals: Sequence[Proposal]) -> None:
    """The TUR of each proposed tolerance around an ntc or ratiometric step's prediction, at the
    worst end of the unit's temperature range, as ``rig check --unit`` shows it once pasted (a
    ratiometric tolerance is in percentage points of its supply, whatever its tag)."""
    tolerances = {
        p.step_id: ("pct" if p.figure_unit == "%" else "abs", float(p.limits.high or 0.0))
        for p in proposals
        if p.form == "tolerance" and p.kind in MODEL_KINDS
    }
    if not tolerances:
        return
    found = model_step_turs(plan, unit, tolerances)
    for proposal in proposals:
        if proposal.step_id in tolerances and proposal.step_id in found:
            worst = found[proposal.step_id].worst
            proposal.tur, proposal.tur_at_c = worst.tur, worst.temp_c
            proposal.tur_dominant = worst.dominant_stated


def _ambient_warnings(plan: Plan, unit: UnitModel, proposals: Sequence[Proposal]) -> list[str]:
    """A unit file with no ``temperature_range`` draws every good unit at one ambient, so limits
    on readings that follow the ambient (copper, an NTC, the reference probe) come out as tight
    as one room temperature allows: say so, and which proposals a room ``ROOM_SHIFT_C`` away
    would fail on a good unit."""
    if unit.ambient_range_c is not None:
        return []
    at = unit.ambient_c
    failing: dict[str, None] = {}
    for temp_c in (at - ROOM_SHIFT_C, at + ROOM_SHIFT_C):
        figures = fault_figures(
            plan, SequencePredictor(plan, replace(unit, ambient_c=temp_c)).predict()
        )
        for proposal in proposals:
            figure = np.array([figures[proposal.step_id][0]])
            if proposal.limits.outside(figure)[0]:
                failing[proposal.step_id] = None
    shift = f"{ROOM_SHIFT_C:g} degC"
    found = (
        f"the proposed limits of {', '.join(failing)} fail a good unit in a room {shift} "
        f"cooler or warmer"
        if failing
        else "limits on readings that follow the ambient hold only at that temperature"
    )
    return [
        f"{unit.path} states no temperature_range under [ambient], so every good unit was drawn "
        f'at {at:g} degC: {found}; add temperature_range = ["LOW degC", "HIGH degC"] '
        f'(the ambient the floor may have, e.g. ["15 degC", "35 degC"]) under [ambient] '
        f"in {unit.path}"
    ]


def _warnings(study: LimitsStudy) -> list[str]:
    target = f"{study.false_reject_ppm:g} ppm"
    found = [
        f"reading {reading}: the station's accuracy table does not cover it, so no meter error "
        "is drawn for it"
        for reading in study.result.no_meter_error
    ]
    specs = {d.spec.id: d.spec for d in study.result.steps}
    for proposal in study.proposals:
        if proposal.tur is not None and tur_is_low(proposal.tur):
            found.append(
                f"step {proposal.step_id}: TUR {tur_text(proposal.tur)}{_at(proposal)} with the "
                f"proposed limits (rig check marks a TUR under {TUR_MINIMUM:g}:1 LOW): "
                f"{_whose_u(specs[proposal.step_id])} is about as wide as the limits, so it "
                "decides verdicts near them; widen them where the faults allow, "
                f"{_remedy(proposal)}"
            )
        if proposal.no_reading:
            found.append(
                f"step {proposal.step_id}: {proposal.no_reading} good units gave no reading; "
                "they count as rejects"
            )
        checks = study.checks[proposal.step_id]
        for check in checks:
            if check.present and not check.catchable:
                found.append(_uncatchable(proposal, check.fault, study.false_reject_ppm))
        if checks and not any(c.catchable for c in checks):
            found.append(
                f"step {proposal.step_id}: no limit that holds {target} catches any fault of the "
                "fault set"
            )
    lost = study.caught_by_any("present") - study.caught_by_any("proposed")
    for fault in study.faults:
        if fault in lost:
            found.append(
                f"fault {fault.spec}: caught now, but by {study.no_step} with the proposed limits"
            )
    return found


def _uncatchable(proposal: Proposal, fault: Fault, target_ppm: float) -> str:
    """A fault the present limits catch and no limit that holds the target can: they catch it
    by rejecting more good units than the target allows (or, where they reject no more, the
    fault lies at the edge of what the target allows and the tail estimate falls on its
    other side)."""
    rejected = f"{_ppm(proposal.present_rejects, proposal.samples)} of good units"
    start = f"step {proposal.step_id}: its present limits catch {fault.spec}"
    target = f"{target_ppm:g} ppm"
    if proposal.present_ppm > target_ppm:
        return f"{start} only by rejecting {rejected}; no limit that holds {target} can"
    return (
        f"{start} while rejecting {rejected}, yet by the tail estimate no limit that holds "
        f"{target} can: the fault lies at the edge of what that rate allows"
    )


def _whose_u(spec: StepSpec) -> str:
    """Whose uncertainty a low TUR comes from: the meter's, and a stated figure's with its u."""
    stated = stated_u_names(spec)
    return (
        "the meter's uncertainty"
        if not stated
        else f"the uncertainty of the meter and of the stated {' and '.join(stated)}"
    )


STATED_INPUT_WORDS = {"reference": "reference voltage"}
"""How the advice names a stated input where its key alone would not say what it is."""


def _remedy(proposal: Proposal) -> str:
    """A smaller uncertainty where it helps: the stated input's where its u makes up most of
    U (a better meter would move the TUR little), else the meter's."""
    name = proposal.tur_dominant
    if name is None:
        return "or measure with a smaller uncertainty"
    words = STATED_INPUT_WORDS.get(name, name)
    return (
        f"or state the {words} with a smaller u ({name}_u; measure it at the bench), which "
        "makes up most of U"
    )


def _at(proposal: Proposal) -> str:
    """Where a TUR around a prediction is taken (empty for fixed limits)."""
    return "" if proposal.tur_at_c is None else f" at {proposal.tur_at_c:g} degC"


def _ppm(count: int, samples: int) -> str:
    if count == 0:
        return f"under {3e6 / samples:.3g} ppm (none of {samples}; 95 %, rule of three)"
    ppm = count / samples * 1e6
    if ppm < 1000:
        return f"{ppm:.3g} ppm ({count} of {samples})"
    return f"{ppm:.0f} ppm ({count} of {samples}, {ppm / 1e4:.3g} %)"


def _class_of(proposal: Proposal) -> str | None:
    """The IEC 60751 class the step is judged by now, which its proposed tolerance replaces."""
    present = proposal.present
    return present.tolerance_class if isinstance(present, ClassLimits) else None


def toml_text(study: LimitsStudy, sequence_name: str, unit_name: str) -> str:
    """The proposed limits as TOML: one table per step id with the keys to paste."""
    r = study.result
    lines = [
        f"# Limits proposed by `rig limits` for sequence {sequence_name} on unit {unit_name}:",
        f"# {r.samples} good units drawn (seed {r.seed}), false-reject target "
        f"{study.false_reject_ppm:g} ppm per step.",
        "# Paste each table's keys into the [[steps]] table with that id, in place of its limit",
        "# keys (low/high, nominal + tolerance, max; tolerance for ntc, rtd and ratiometric",
        "# steps; for an rtd step, in place of tolerance_class where it has one).",
    ]
    if study.not_studied:
        lines.append(f"# Not studied (--step leaves them out): {', '.join(study.not_studied)}.")
    if study.warnings:
        lines.append("#")
        lines.append("# Warnings:")
        for warning in study.warnings:
            lines.extend(
                textwrap.wrap(warning, 100, initial_indent="# - ", subsequent_indent="#   ")
            )
    for proposal in study.proposals:
        lines.append("")
        lines.append(f"[{proposal.step_id}]")
        if proposal.tur is not None and tur_is_low(proposal.tur):
            lines.append(
                f"# TUR {tur_text(proposal.tur)}{_at(proposal)} (under {TUR_MINIMUM:g}:1): "
                "see the warnings"
            )
        cls = _class_of(proposal)
        if cls is not None:
            lines.append(
                f'# in place of tolerance_class = "{cls}": delete that key (a step takes a class '
                "or a tolerance, not both)"
            )
        lines.extend(f'{key} = "{text}"' for key, text in proposal.toml.items())
    return "\n".join(lines) + "\n"
