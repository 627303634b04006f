"""Fault coverage: which single faults a sequence catches, found on the solver.

Each fault of the set runs through the whole sequence (``SequencePredictor``); a fault is detected
when any step would fail, conditionally fail or could not measure.  A conditional pass lets the unit
through, so it does not count as detected.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

from rig.analysis.fault_set import DETECTING, single_faults
from rig.analysis.predict import SequencePredictor
from rig.config.unit_file import UnitModel
from rig.faults import Fault
from rig.judge.decision import Verdict
from rig.plan import Plan


@dataclass(frozen=True)
class CoverageRow:
    fault: Fault
    verdicts: tuple[Verdict, ...]
    """One per step, in plan order."""

    @property
    def detected(self) -> bool:
        return any(v in DETECTING for v in self.verdicts)


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
    def coverage_pct(self) -> float:
        return 100.0 * len(self.detected) / len(self.rows) if self.rows else 0.0

    @property
    def good_unit_passes(self) -> bool:
        return not any(v in DETECTING for v in self.good_unit)

    def as_dict(self) -> dict[str, object]:
        return {
            "faults": len(self.rows),
            "detected": len(self.detected),
            "coverage_pct": round(self.coverage_pct, 2),
            "undetected": [f.spec for f in self.undetected],
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
    good = tuple(s.verdict for s in predictor.predict())
    rows = tuple(
        CoverageRow(fault, tuple(s.verdict for s in predictor.predict([fault]))) for fault in chosen
    )
    return CoverageReport(tuple(p.spec.id for p in plan.steps), rows, good)
