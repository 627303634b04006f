"""The diagnosis shown for a failed run, from ``rig.analysis.diagnose`` when it can be made.

A diagnosis needs the unit model and the plan (sequence on its station).  When the analysis
module is not installed, the run passed, or the unit or station cannot be found, the report says
why there is no diagnosis instead of guessing one.
"""

from __future__ import annotations

import importlib
import logging
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from rig.config.station import Station
from rig.errors import RigError
from rig.events import NOT_READINGS
from rig.store import ResultStore

log = logging.getLogger(__name__)

FAILED_VERDICTS = ("fail", "conditional fail", "error")


def unavailable(message: str) -> dict[str, Any]:
    return {"available": False, "message": message, "hypotheses": [], "next_check": None}


def find_unit_file(run: Mapping[str, Any], unit_path: Path | None) -> Path | None:
    """The unit file given, else the one the run recorded: ``rig run --unit`` records the file
    itself, the demo a unit's name, found in ``units/`` beside the run's sequence or among the
    shipped ones.  None where none is given, recorded or found."""
    if unit_path is not None:
        return unit_path
    recorded = str(run.get("unit") or "")
    if not recorded:
        return None
    if recorded.endswith(".toml"):
        return Path(recorded) if Path(recorded).is_file() else None
    from rig.demo import sequences_dir

    beside = Path(str(run.get("sequence_path") or ".")).parent / "units"
    for folder in (beside, sequences_dir() / "units"):
        candidate = folder / f"{recorded}.toml"
        if candidate.is_file():
            return candidate
    return None


def sequence_not_found(who: str, recorded: str, *, elsewhere: bool = False) -> str:
    """Why the sequence file the run ``who`` names records cannot be read, in words naming the
    recorded path and the command that takes another (empty when it is there).  Runs record it
    in full; older runs recorded it as typed, so from another folder it is not found; a run
    another station made (``elsewhere``) records that bench's path."""
    path = Path(recorded)
    if path.is_file():
        return ""
    if not path.is_absolute():
        where = f"relative to the folder rig run was started in; not found from {Path.cwd()}"
    else:
        where = "not on this computer" if elsewhere else "no longer there"
    return f"{who} records sequence file {recorded!r} ({where}); give --sequence FILE"


_LOADED: dict[tuple[str, str, int], tuple[Any, Any]] = {}
"""Unit models and plans already loaded, so many runs of one sequence are diagnosed quickly
(the analysis keeps its own work per plan object)."""


def _unit_and_plan(unit_file: Path, sequence_path: str, station: Station) -> tuple[Any, Any]:
    key = (str(unit_file), sequence_path, id(station))
    if key not in _LOADED:
        from rig.config.unit_file import load_unit
        from rig.runner import load_plan

        if len(_LOADED) > 16:
            _LOADED.clear()
        _LOADED[key] = (load_unit(unit_file), load_plan(sequence_path, station))
    return _LOADED[key]


def not_diagnosed(run: Mapping[str, Any]) -> str:
    """Why a run that did not end complete gets no diagnosis (empty for one that did): its
    faults would be guessed from the steps it never measured."""
    status = str(run.get("status") or "")
    if status in ("aborted", "incomplete"):
        return f"no diagnosis is made of an {status} run: it ended before every step was measured"
    if status == "running":
        return "no diagnosis yet: the run has not ended"
    return ""


def diagnose_stored_run(
    store: ResultStore,
    run: Mapping[str, Any],
    *,
    station: Station | None,
    unit_path: Path | None = None,
) -> dict[str, Any]:
    """The diagnosis of one stored run as plain data, or the reason there is none."""
    unfinished = not_diagnosed(run)
    if unfinished:
        return unavailable(unfinished)
    if run.get("verdict") not in FAILED_VERDICTS:
        return unavailable("the run did not fail: no diagnosis needed")
    try:
        module = importlib.import_module("rig.analysis.diagnose")
    except ImportError:
        return unavailable("no diagnosis is available: the fault analysis is not installed")
    failed = [s for s in store.steps(int(run["id"])) if s["verdict"] in FAILED_VERDICTS]
    if failed and all(s["unit"] in NOT_READINGS for s in failed):
        return unavailable(
            "nothing for a diagnosis to explain: what failed is an operator's answer or a harness "
            "proof, whose findings are in its step's note"
        )
    if station is None:
        return unavailable("no diagnosis is available: give --station to plan the sequence")
    unit_file = find_unit_file(run, unit_path)
    if unit_file is None:
        recorded = run.get("unit")
        why = (
            f"the run records unit {recorded!r}, not found"
            if recorded
            else "the run records no unit file (it was run without --unit)"
        )
        return unavailable(f"no diagnosis is available: {why}; give --unit FILE")
    missing = sequence_not_found(f"run {run.get('id')}", str(run["sequence_path"]))
    if missing:
        return unavailable(f"no diagnosis is available: {missing} to rig diagnose")
    try:
        unit, plan = _unit_and_plan(unit_file, str(run["sequence_path"]), station)
        found = module.diagnose_run(store, int(run["id"]), unit, plan)
    except RigError as exc:
        return unavailable(f"no diagnosis is available: {exc}")
    except Exception as exc:  # the report must still be written; the log keeps the detail
        log.debug("diagnosis of run %s failed", run.get("id"), exc_info=True)
        return unavailable(f"no diagnosis is available: the analysis failed ({exc})")
    return {
        "available": True,
        "message": "",
        "hypotheses": [
            {
                "spec": str(h.spec),
                "probability": float(h.probability),
                "where": str(getattr(h, "where", "")),
                "same_as": [str(x) for x in getattr(h, "same_as", ())],
            }
            for h in found.hypotheses
        ],
        "next_check": found.next_check,
    }
