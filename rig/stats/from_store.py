"""Shop statistics from a results store: the store's bulk reads fed to the pure computations.

Step moments are added up by the database (``ResultStore.step_moments``), so a million stored
values never pass through Python one by one; runs come as plain rows into one DataFrame.
"""

from __future__ import annotations

import threading
from collections import Counter
from collections.abc import Callable
from concurrent.futures import Future
from dataclasses import asdict, dataclass, replace
from typing import Any

import pandas as pd

from rig.events import NOT_READINGS
from rig.stats.capability import capability_from_moments, moments_from_sums
from rig.stats.filters import RunFilter
from rig.stats.grr import GaugeStudy, GaugeStudyError, Observation, gauge_rr
from rig.stats.pareto import fault_kind, pareto
from rig.stats.yields import (
    runs_frame,
    screen_outcomes,
    units_frame,
    yield_by_day,
    yield_by_sequence,
)
from rig.store import ResultStore

FaultFinder = Callable[[int], str | None]
"""Given a failed run's id, the spec of its most likely fault, or None if none is known."""


@dataclass(frozen=True)
class StepStats:
    sequence: str
    step_id: str
    unit: str
    low: float | None
    high: float | None
    n: int
    mean: float
    std: float
    cp: float | None
    cpk: float | None
    mean_expanded_u: float | None
    position: int
    failures: int


@dataclass
class ShopStats:
    where: RunFilter
    runs: int
    by_sequence: pd.DataFrame
    by_day: pd.DataFrame
    screens: pd.DataFrame
    pareto_steps: pd.DataFrame
    pareto_faults: pd.DataFrame | None
    fault_note: str
    steps: list[StepStats]

    def to_dict(self) -> dict[str, Any]:
        """Plain data for ``--json`` (NaN becomes null)."""

        def records(frame: pd.DataFrame | None) -> list[dict[str, Any]] | None:
            if frame is None:
                return None
            clean = frame.astype(object).where(frame.notna(), None)
            return [dict(r) for r in clean.to_dict(orient="records")]

        def clean(value: Any) -> Any:
            return None if isinstance(value, float) and value != value else value

        return {
            "filter": {k: (None if v is None else str(v)) for k, v in asdict(self.where).items()},
            "runs": self.runs,
            "yield_by_sequence": records(self.by_sequence),
            "yield_by_day": records(self.by_day),
            "screen_outcomes": records(self.screens),
            "pareto_by_step": records(self.pareto_steps),
            "pareto_by_fault_kind": records(self.pareto_faults),
            "fault_kind_note": self.fault_note,
            "steps": [{k: clean(v) for k, v in asdict(s).items()} for s in self.steps],
        }


def step_stats(store: ResultStore, where: RunFilter) -> list[StepStats]:
    """Mean, standard deviation, Cp and Cpk of every numeric step, per set of limits."""
    return step_stats_from(store.step_moments(where))


def step_moments_alongside(store: ResultStore, where: RunFilter) -> Future[list[Any]]:
    """The step sums read on a second connection in a worker thread, so the database adds them
    up while this thread reads the runs (SQLite lets go of the GIL while it works); on a server,
    in turn on the one connection."""
    result: Future[list[Any]] = Future()
    path = store.path
    if path is None:
        result.set_result(store.step_moments(where))
        return result

    def read() -> None:
        try:
            second = ResultStore(path)
            try:
                result.set_result(second.step_moments(where))
            finally:
                second.close()
        except BaseException as exc:  # handed to the caller's thread by result()
            result.set_exception(exc)

    threading.Thread(target=read, name="step-sums", daemon=True).start()
    return result


def step_stats_from(moments: list[Any]) -> list[StepStats]:
    """``StepStats`` from the rows of ``ResultStore.step_moments``."""
    found = []
    for row in moments:
        sequence, step_id, unit, low, high, n, sum_d, sum_d2, mean_u, position, failures = row
        shift = low if low is not None else (high if high is not None else 0.0)
        mean, std = moments_from_sums(int(n), float(sum_d or 0), float(sum_d2 or 0), shift)
        cap = capability_from_moments(int(n), mean, std, low, high)
        found.append(
            StepStats(
                sequence,
                step_id,
                unit,
                low,
                high,
                cap.n,
                cap.mean,
                cap.std,
                cap.cp,
                cap.cpk,
                None if mean_u is None else float(mean_u),
                int(position),
                int(failures or 0),
            )
        )
    return sorted(found, key=lambda s: (s.sequence, s.position, s.step_id))


def shop_stats(
    store: ResultStore, where: RunFilter, find_fault: FaultFinder | None = None
) -> ShopStats:
    """Yield, screen outcomes, failure Pareto and step capability for the runs ``where`` picks."""
    moments = step_moments_alongside(store, where)
    runs = runs_frame(store.run_rows(where))
    units = units_frame(runs)
    groups = step_stats_from(moments.result())
    by_step = Counter[str]()
    for group in groups:
        by_step[f"{group.sequence} / {group.step_id}"] += group.failures
    if find_fault is None:
        faults, note = None, "no diagnosis is available (give --station, with the unit files)"
    else:
        failed_runs = runs.loc[runs["failed"], "id"].astype(int).tolist()
        specs = [find_fault(run_id) for run_id in failed_runs]
        kinds = Counter(fault_kind(s) if s else "not diagnosed" for s in specs)
        faults = pareto(kinds, "fault_kind")
        note = f"most likely fault of each of {len(failed_runs)} failed runs"
    return ShopStats(
        where=where,
        runs=len(runs),
        by_sequence=yield_by_sequence(runs, units),
        by_day=yield_by_day(units),
        screens=screen_outcomes(units),
        pareto_steps=pareto(by_step, "step"),
        pareto_faults=faults,
        fault_note=note,
        steps=[g for g in groups if g.n > 0 and g.unit not in NOT_READINGS],  # in the Pareto still,
    )


def stored_study(store: ResultStore, where: RunFilter, sequence: str, step_id: str) -> GaugeStudy:
    """The gauge study recorded by study-mode runs: part and trial from the run, operator as
    appraiser, the step's value as the measurement."""
    study_filter = replace(where, study=True, sequence=sequence)
    rows = store.step_series(study_filter, sequence, step_id)
    if not rows:
        raise GaugeStudyError(
            f"no study-mode runs of sequence {sequence!r} with step {step_id!r} in {store.where}"
            " (record them with rig run --study-part P --study-trial N --operator NAME)"
        )
    observations = [
        Observation(
            str(part),
            str(operator),
            int(trial),
            float("nan") if value is None else value,
            where=f"run {run_id}",
        )
        for run_id, _, value, _, _, _, part, operator, trial in rows
    ]
    return gauge_rr(observations)
