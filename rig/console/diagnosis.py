"""The fault hypotheses of a failed run, when the diagnosis module and the unit model are there.

Diagnosis needs the unit's model to simulate faults against.  The run record names the unit; the
console knows the model itself on a virtual bench, or finds ``units/<name>.toml`` beside the
shipped sequences.  Whatever is missing, the operator is told in words rather than shown nothing.
"""

from __future__ import annotations

import importlib
import logging
from dataclasses import dataclass, field
from pathlib import Path

from rig.config.unit_file import UnitModel, load_unit
from rig.errors import RigError
from rig.plan import Plan
from rig.store import ResultStore

log = logging.getLogger(__name__)

MAX_SHOWN = 5
"""Hypotheses shown on screen; the rest are in the run's diagnosis report."""


@dataclass(frozen=True)
class Hypothesis:
    fault: str
    probability: float
    """Of the fault and of those ``same_as`` together: the sequence cannot tell them apart."""
    where: str
    same_as: tuple[str, ...] = ()


@dataclass(frozen=True)
class DiagnosisView:
    """What the run screen shows after a failed run."""

    run_id: int
    hypotheses: tuple[Hypothesis, ...] = field(default_factory=tuple)
    next_check: str | None = None
    unavailable: str = ""
    """Why there is no diagnosis, in words; empty when there is one."""


def find_unit(name: str, known: UnitModel | None, units_dir: Path) -> UnitModel | None:
    """The unit model a run names: the one the console knows, the unit file the run recorded,
    or ``units_dir/<name>.toml``."""
    if not name:
        return None
    recorded = Path(name) if name.endswith(".toml") else None
    if known is not None and (
        known.name == name or (recorded is not None and known.path.resolve() == recorded.resolve())
    ):
        return known
    path = recorded if recorded is not None else units_dir / f"{name}.toml"
    if not path.is_file():
        return None
    try:
        return load_unit(path)
    except RigError as exc:
        log.warning("unit file %s could not be read for diagnosis: %s", path, exc)
        return None


def diagnose(
    store: ResultStore, run_id: int, plan: Plan, known: UnitModel | None, units_dir: Path
) -> DiagnosisView:
    """Ask ``rig.analysis.diagnose`` for the ranked hypotheses, or say why that cannot be done."""
    unit_name = str(store.run(run_id).get("unit") or "")
    unit = find_unit(unit_name, known, units_dir)
    if unit is None:
        why = (
            f"no diagnosis available: no unit model {unit_name!r} found"
            if unit_name
            else "no diagnosis available: the run names no unit model"
        )
        return DiagnosisView(run_id, unavailable=why)
    try:
        module = importlib.import_module("rig.analysis.diagnose")
    except ImportError:
        return DiagnosisView(run_id, unavailable="no diagnosis available (module not installed)")
    try:
        found = module.diagnose_run(store, run_id, unit, plan)
    except RigError as exc:
        return DiagnosisView(run_id, unavailable=f"no diagnosis available: {exc}")
    except Exception as exc:  # a fault in another module must not take the console down
        log.exception("diagnosis of run %s failed", run_id)
        return DiagnosisView(run_id, unavailable=f"no diagnosis available: {exc!r}")
    hypotheses = tuple(
        Hypothesis(
            str(h.spec), float(h.probability), str(h.where or ""), tuple(map(str, h.same_as))
        )
        for h in list(found.hypotheses)[:MAX_SHOWN]
    )
    return DiagnosisView(run_id, hypotheses, found.next_check)
