"""Fault coverage: which single faults a sequence catches, found on the solver.

Each fault of the set runs through the whole sequence (``SequencePredictor``); a fault is detected
when any step would fail, conditionally fail or could not measure.  A conditional pass lets the unit
through, so it does not count as detected.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from rig.analysis.fault_set import DETECTING, single_faults
from rig.analysis.predict import SequencePredictor, StepPrediction
from rig.config.unit_file import UnitModel
from rig.faults import Fault
from rig.judge.decision import Verdict
from rig.plan import Plan


@dataclass(frozen=True)
class CoverageRow:
    fault: Fault
    verdicts: tuple[Verdict, ...]
    """One per step, in plan order."""
    unseen: bool = False
    """No reading of the sequence moves by more than its expanded uncertainty with this fault:
    no limit on these readings could catch it; it needs another reading, or does not change
    the circuit as these readings see it."""

    @property
    def detected(self) -> bool:
        return any(v in DETECTING for v in self.verdicts)


def moves_no_reading(good: Sequence[StepPrediction], faulty: Sequence[StepPrediction]) -> bool:
    """Every step's value under the fault within the step's U of the good unit's (a step with
    no stated uncertainty counts as moved if its value changes at all)."""
    for ok, bad in zip(good, faulty, strict=True):
        if math.isnan(ok.value) != math.isnan(bad.value):
            return False
        if math.isnan(ok.value):
            continue
        room = ok.expanded_u if math.isfinite(ok.expanded_u) else 0.0
        if abs(bad.value - ok.value) > room:
            return False
    return True


@dataclass(frozen=True)
class CoverageReport:
    steps: tuple[str, ...]
    rows: tuple[CoverageRow, ...]
    good_unit: tuple[Verdict, ...]
    """The verdicts for the unit with no fault: a sequence that fails a good unit proves nothing."""

    @property
    def detected(self) -> list[Fault]:
        return [r.fault for r in self.rows if r.detected]

    @property
    def undetected(self) -> list[Fault]:
        return [r.fault for r in self.rows if not r.detected]

    @property
    def coverage_pct(self) -> float | None:
        """The detected share in %; None where the unit with no fault fails: a step that fails
        it "detects" every fault, so a share would count the sequence's error as coverage."""
        if not self.good_unit_passes:
            return None
        return 100.0 * len(self.detected) / len(self.rows) if self.rows else 0.0

    @property
    def good_unit_passes(self) -> bool:
        return not self.good_unit_fails

    @property
    def good_unit_fails(self) -> list[str]:
        """The steps that fail, conditionally fail or cannot measure the unit with no fault."""
        return [s for s, v in zip(self.steps, self.good_unit, strict=True) if v in DETECTING]

    @property
    def no_coverage_reason(self) -> str:
        """Why no coverage figure is given (empty where one is)."""
        failing = self.good_unit_fails
        if not failing:
            return ""
        which = "step" if len(failing) == 1 else "steps"
        return (
            f"the unit with no fault fails {which} {', '.join(failing)}; fix the sequence or the "
            "unit model first"
        )

    def as_dict(self) -> dict[str, object]:
        pct = self.coverage_pct
        return {
            "faults": len(self.rows),
            "detected": len(self.detected),
            "coverage_pct": None if pct is None else round(pct, 2),
            "coverage_reason": self.no_coverage_reason or None,
            "undetected": [f.spec for f in self.undetected],
            "unseen": [r.fault.spec for r in self.rows if r.unseen and not r.detected],
            "steps": list(self.steps),
            "good_unit": dict(zip(self.steps, (v.value for v in self.good_unit), strict=True)),
            "matrix": {
                r.fault.spec: dict(zip(self.steps, (v.value for v in r.verdicts), strict=True))
                for r in self.rows
            },
        }


def fault_coverage(
    plan: Plan, unit: UnitModel, faults: Sequence[Fault] | None = None
) -> CoverageReport:
    """Run the plan for every fault (default: the unit's single-fault set)."""
    chosen = list(faults) if faults is not None else single_faults(unit, plan)
    predictor = SequencePredictor(plan, unit)
    good = predictor.predict()
    rows = []
    for fault in chosen:
        faulty = predictor.predict([fault])
        rows.append(
            CoverageRow(fault, tuple(s.verdict for s in faulty), moves_no_reading(good, faulty))
        )
    steps = tuple(p.spec.id for p in plan.steps)
    return CoverageReport(steps, tuple(rows), tuple(s.verdict for s in good))
