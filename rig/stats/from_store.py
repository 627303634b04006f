"""Shop statistics from a results store: the store's bulk reads fed to the pure computations.

Step moments are added up by the database (``ResultStore.step_moments``), so a million stored
values never pass through Python one by one; runs come as plain rows into one DataFrame.
"""

from __future__ import annotations

import math
import threading
from collections import Counter
from collections.abc import Callable
from concurrent.futures import Future
from dataclasses import asdict, dataclass, field, replace
from typing import Any

import pandas as pd

from rig.events import NOT_READINGS
from rig.screening import ANSWER_UNIT, UNDECIDED, is_screen, undecided_cause
from rig.stats.capability import (
    Capability,
    capability,
    capability_from_moments,
    moments_from_sums,
)
from rig.stats.filters import RunFilter
from rig.stats.grr import GaugeStudy, GaugeStudyError, Observation, gauge_rr
from rig.stats.pareto import NO_FINDING, fault_kind, harness_findings, pareto
from rig.stats.yields import (
    run_decision,
    runs_frame,
    screen_outcomes,
    units_frame,
    yield_by_day,
    yield_by_sequence,
)
from rig.store import Migrate, ResultStore, SqliteBackend

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
    """Part failures (``rig.store.part_failure_sql``): fail or conditional fail in a run the
    screen can decide, of a step that reads the part; what the Pareto counts."""


@dataclass(frozen=True)
class SequenceVersion:
    """One version (content hash) of a sequence that runs of the statistics used."""

    sequence: str
    sequence_hash: str
    runs: int
    first_started: str


HASH_SHOWN = 12
"""Hex digits of a version's hash shown: enough to tell versions apart, short to type back."""


def versions_text(versions: list[SequenceVersion]) -> list[str]:
    """A line per sequence that more than one version contributed to: its runs merge in one
    yield and Pareto, so say which versions and since when."""
    by_name: dict[str, list[SequenceVersion]] = {}
    for version in versions:
        by_name.setdefault(version.sequence, []).append(version)
    return [
        f"{name}: {len(found)} versions of this sequence: "
        + ", ".join(
            f"{v.sequence_hash[:HASH_SHOWN]} ({v.runs} run{'s' if v.runs != 1 else ''}, "
            f"from {v.first_started[:10]})"
            for v in found
        )
        for name, found in by_name.items()
        if len(found) > 1
    ]


@dataclass
class ShopStats:
    where: RunFilter
    runs: int
    by_sequence: pd.DataFrame
    by_day: pd.DataFrame
    screens: pd.DataFrame
    pareto_steps: pd.DataFrame
    pareto_faults: pd.DataFrame | None
    """Failed runs of screens by the kind of each one's most likely fault: one per run."""
    fault_note: str
    pareto_findings: pd.DataFrame | None
    """Every finding of every failed harness proof by kind (a run with three counts three);
    None where no harness proof is among the runs."""
    findings_note: str
    undecided: pd.DataFrame
    """Runs that decided nothing (stopped, instrument fault, ...), by cause: kept out of the
    Pareto, whose counts are part failures only."""
    steps: list[StepStats]
    versions: list[SequenceVersion] = field(default_factory=list)

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
            "filter": {
                k: (v if v is None or isinstance(v, bool) else str(v))
                for k, v in asdict(self.where).items()
            },
            "runs": self.runs,
            "yield_by_sequence": records(self.by_sequence),
            "yield_by_day": records(self.by_day),
            "screen_outcomes": records(self.screens),
            "pareto_by_step": records(self.pareto_steps),
            "pareto_by_fault_kind": records(self.pareto_faults),
            "fault_kind_note": self.fault_note,
            "harness_findings_by_kind": records(self.pareto_findings),
            "harness_findings_note": self.findings_note,
            "not_decided": records(self.undecided),
            "steps": [{k: clean(v) for k, v in asdict(s).items()} for s in self.steps],
            "sequence_versions": [asdict(v) for v in self.versions],
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
            # the same file, up to date (a file read from an upgraded copy has no path)
            second = ResultStore(SqliteBackend.open_read_only(path), Migrate.NEVER)
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
        mean_u = None if mean_u is None else float(mean_u)
        found.append(
            _stats(sequence, step_id, unit, (low, high), cap, mean_u, int(position), failures)
        )
    return sorted(found, key=lambda s: (s.sequence, s.position, s.step_id))


def _stats(
    sequence: str,
    step_id: str,
    unit: str,
    limits: tuple[float | None, float | None],
    cap: Capability,
    mean_u: float | None,
    position: int,
    failures: int | None,
) -> StepStats:
    low, high = limits
    return StepStats(
        sequence, step_id, unit, low, high, cap.n, cap.mean, cap.std, cap.cp, cap.cpk, mean_u,
        position, int(failures or 0),
    )  # fmt: skip


def model_step_stats(rows: list[Any]) -> list[StepStats]:
    """``StepStats`` of steps judged around a prediction, from ``ResultStore.model_step_rows``:
    of each reading's deviation from its prediction, against the tolerance, which stays put
    while the limits move with the prediction (an NTC's with the measured temperature).  The
    deviation is in the step's unit where the limits keep their offset from the prediction, else
    in % of the prediction where they keep their ratio to it (a tolerance in %).  Where the
    tolerance changed between runs (an edited sequence), a row per tolerance: the runs are
    grouped by the limits' ratio to the prediction, or by their offset from it where that makes
    fewer groups, so a step keeps its % rows rather than one row in V per run.  Limits that keep
    neither but stay centred on the prediction with a width that moves a little from run to run
    (an RTD's IEC 60751 class, wider as the temperature moves from 0 degC) give one row in % of
    the tolerance.  A group whose limits keep none of these gets a row per set of limits, on its
    values, as a fixed-limit step."""
    by_step: dict[tuple[str, str], list[Any]] = {}
    for row in rows:
        by_step.setdefault((str(row[0]), str(row[1])), []).append(row)
    found = []
    for (sequence, step_id), runs in by_step.items():
        figure, groups = _by_tolerance(runs)
        for group in groups:
            form = None if figure is None else _deviation_form(group, figure)
            if form is not None:
                low, high, figures = form
                assert figure is not None
                found.append(_model_row(sequence, step_id, figure, (low, high), figures, group))
                continue
            # limits that keep no one offset nor ratio: per set of limits, on the values, as
            # fixed-limit steps; its failures count all the same
            by_limits: dict[tuple[Any, Any], list[Any]] = {}
            for row in group:
                by_limits.setdefault((row[5], row[6]), []).append(row)
            for (low, high), same in by_limits.items():
                values = [float(r[3]) for r in same if r[3] is not None]
                unit = str(same[0][2])
                found.append(_model_row(sequence, step_id, unit, (low, high), values, same))
    return found


def _by_tolerance(runs: list[Any]) -> tuple[str | None, list[list[Any]]]:
    """A model step's runs grouped by where their limits lie against the prediction: by offset
    (a tolerance in the step's unit), by ratio (a tolerance in %), whichever makes fewer groups
    (offset on a tie: where the prediction never moved, both hold), in the order of each group's
    first run; where each run is its own group under both, all in one group in % of a tolerance
    that stays centred and near one width (``SHARE``); (None, all runs) where none applies.
    Returns the figure's unit (``figure_scale``) with the groups."""
    offset = f"{_points(str(runs[0][2]))} off prediction"
    best: tuple[str | None, list[list[Any]]] = (None, [runs])
    for figure in (offset, RELATIVE):
        groups: list[tuple[tuple[float | None, float | None], list[Any]]] = []
        for row in runs:
            sides = _sides(row, figure)
            if sides is None:  # no prediction to scale by: this grouping does not apply
                break
            for first, members in groups:
                if _all_close([first, sides]):
                    members.append(row)
                    break
            else:
                groups.append((sides, [row]))
        else:
            if best[0] is None or len(groups) < len(best[1]):
                best = figure, [members for _, members in groups]
    if len(runs) > 1 and len(best[1]) == len(runs) and _one_share(runs):
        return SHARE, [runs]
    return best


def _one_share(runs: list[Any]) -> bool:
    """Whether the runs' limits all sit centred on their predictions with widths within
    ``SHARE_SPREAD`` of each other: one tolerance that moves with the conditions, not several."""
    halves = []
    for row in runs:
        scale = figure_scale(SHARE, row[4], row[5], row[6])
        if scale is None:
            return False
        halves.append(scale)
    return max(halves) <= SHARE_SPREAD * min(halves)


def _sides(row: Any, figure: str) -> tuple[float | None, float | None] | None:
    """A stored run's limits against its prediction, in the figure's unit (None: no scale)."""
    predicted = row[4]
    scale = figure_scale(figure, predicted, row[5], row[6])
    if scale is None:
        return None
    return _offset(row[5], predicted, scale), _offset(row[6], predicted, scale)


def _model_row(
    sequence: str,
    step_id: str,
    unit: str,
    limits: tuple[float | None, float | None],
    figures: list[float],
    runs: list[Any],
) -> StepStats:
    """One row of ``model_step_stats``: the figures' capability and the runs' failures."""
    cap = capability(figures, *limits)
    # each run's U in the unit of the figures (a % deviation scales by its own prediction)
    us = [
        spread_of(float(r[7]), float(r[4]), unit, r[5], r[6])
        for r in runs
        if r[7] is not None and math.isfinite(float(r[7]))
    ]
    us = [u for u in us if math.isfinite(u)]
    mean_u = sum(us) / len(us) if us else None
    position = min(int(r[8]) for r in runs)
    failures = sum(int(r[11]) for r in runs)
    return _stats(sequence, step_id, unit, limits, cap, mean_u, position, failures)


def _deviation_form(
    runs: list[Any], figure: str
) -> tuple[float | None, float | None, list[float]] | None:
    """(low, high, deviations) of a model step's runs in the ``figure`` unit, or None where
    their limits do not keep one place in it."""
    sides: list[tuple[float | None, float | None]] = []
    figures: list[float] = []
    for _, _, _, value, predicted, low, high, *_ in runs:
        scale = figure_scale(figure, predicted, low, high)
        if scale is None:
            return None
        sides.append((_offset(low, predicted, scale), _offset(high, predicted, scale)))
        if value is not None and math.isfinite(float(value)):
            figures.append((float(value) - float(predicted)) / scale)
    if not _all_close(sides):
        return None
    low, high = sides[0]
    return low, high, figures


RELATIVE = "% of prediction"
"""The unit of a model step's deviation where its limits keep a ratio to the prediction."""
SHARE = "% of tolerance"
"""The unit of a model step's deviation where its limits stay centred on the prediction with a
width that moves with the conditions (an RTD's class): -100 and 100 are the limits."""
SHARE_SPREAD = 4.0
"""How far the widths of one moving tolerance may differ, largest over smallest, before the
runs are taken as judged by different tolerances (our own choice, no published source): an RTD
class B's width in ohm (IEC 60751, through the curve's slope) grows some 1.7 times from a 15 degC
room to a 70 degC well, and 3 times from 0 to 150 degC."""


def figure_scale(figure: str, predicted: Any, low: Any, high: Any) -> float | None:
    """What a deviation from ``predicted`` is divided by to give it in the ``figure`` unit: 1 off
    the prediction in the step's unit, 1 % of the prediction, or 1 % of the half-width of limits
    centred on it; None where that scale does not exist for these limits."""
    if predicted is None or not math.isfinite(float(predicted)):
        return None
    if figure == RELATIVE:
        scale = abs(float(predicted)) / 100.0
    elif figure == SHARE:
        if low is None or high is None:
            return None
        half = (float(high) - float(low)) / 2.0
        centre = (float(high) + float(low)) / 2.0
        if not half > 0 or not math.isclose(centre, float(predicted), abs_tol=1e-6 * half):
            return None
        scale = half / 100.0
    else:
        scale = 1.0
    return scale if scale > 0 and math.isfinite(scale) else None


def deviation_of(value: float, predicted: float, figure: str, low: Any, high: Any) -> float:
    """A reading's deviation from its prediction, in the unit ``model_step_stats`` gave its
    step (``RELATIVE``, ``SHARE``, or the step's unit "off prediction"); NaN without a scale."""
    scale = figure_scale(figure, predicted, low, high)
    return math.nan if scale is None else (value - predicted) / scale


def judged_as(step: StepStats, low: Any, high: Any, predicted: float) -> bool:
    """Whether a stored step run with these limits and prediction belongs to the row ``step``
    of a model step: its limits lie where the row's do against the prediction (a row per
    tolerance, ``model_step_stats``)."""
    scale = figure_scale(step.unit, predicted, low, high)
    if scale is None:
        return False
    sides = (_offset(low, predicted, scale), _offset(high, predicted, scale))
    return _all_close([(step.low, step.high), sides])


def spread_of(width: float, predicted: float, figure: str, low: Any, high: Any) -> float:
    """A width in the reading's unit (its expanded uncertainty) in the unit of its deviation
    (``deviation_of``): a guard band drawn against % limits must be in % of the same scale."""
    scale = figure_scale(figure, predicted, low, high)
    return math.nan if scale is None else width / scale


def _points(unit: str) -> str:
    """A difference of two values in %, in words that do not read as a share of the prediction."""
    return "percentage points" if unit == "%" else unit


def _offset(limit: Any, predicted: Any, scale: float) -> float | None:
    """A limit's distance from the prediction, in units of ``scale``."""
    return None if limit is None else (float(limit) - float(predicted)) / scale


def _all_close(sides: list[tuple[float | None, float | None]]) -> bool:
    """Every run's limits at the same place against its prediction."""
    first = sides[0]
    return all(
        (a is None and b is None)
        or (a is not None and b is not None and math.isclose(a, b, rel_tol=1e-6, abs_tol=1e-12))
        for side in sides
        for a, b in zip(first, side, strict=True)
    )


def _without(table: pd.DataFrame, sequences: set[str]) -> pd.DataFrame:
    """``table``'s rows of every sequence but ``sequences``."""
    return table[~table["sequence"].isin(sequences)].reset_index(drop=True)


def shop_stats(
    store: ResultStore, where: RunFilter, find_fault: FaultFinder | None = None
) -> ShopStats:
    """Yield, screen outcomes, failure Pareto and step capability for the runs ``where`` picks."""
    moments = step_moments_alongside(store, where)
    runs = runs_frame(store.run_rows(where))
    units = units_frame(runs)
    groups = step_stats_from(moments.result()) + model_step_stats(store.model_step_rows(where))
    groups.sort(key=lambda g: (g.sequence, g.position, g.step_id))
    # a harness proof or capture ships, rejects or records a harness, not a returned unit's
    # fault: no screen of it
    units_of: dict[str, set[str]] = {}
    for group in groups:
        units_of.setdefault(group.sequence, set()).add(group.unit)
    harness_proofs = {sequence for sequence, units in units_of.items() if not is_screen(units)}
    by_step = Counter[str]()
    for group in groups:  # an operator's no is no failure of the part
        if group.unit != ANSWER_UNIT:
            by_step[f"{group.sequence} / {group.step_id}"] += group.failures
    failed = runs.loc[runs["failed"], ["id", "sequence_name"]]
    proofs_failed = [int(i) for i, name in failed.itertuples(index=False) if name in harness_proofs]
    failed_runs = [int(i) for i in failed["id"] if int(i) not in set(proofs_failed)]
    if find_fault is None:
        faults, note = None, "no diagnosis is available (give --station, with the unit files)"
    else:
        specs = [find_fault(run_id) for run_id in failed_runs]
        kinds = Counter(fault_kind(s) if s else "not diagnosed" for s in specs)
        faults = pareto(kinds, "fault_kind")
        note = f"most likely fault of each of {len(failed_runs)} failed runs"
        if proofs_failed:
            note += " (failed harness proofs apart: their findings are counted by kind below)"
    findings, findings_note = _findings_pareto(store, proofs_failed, bool(harness_proofs))
    return ShopStats(
        where=where,
        runs=len(runs),
        by_sequence=yield_by_sequence(runs, units),
        by_day=yield_by_day(units),
        screens=_without(screen_outcomes(units), harness_proofs),
        pareto_steps=pareto(by_step, "step"),
        pareto_faults=faults,
        fault_note=note,
        pareto_findings=findings,
        findings_note=findings_note,
        undecided=undecided_causes(runs),
        steps=[g for g in groups if g.n > 0 and g.unit not in NOT_READINGS],  # in the Pareto still,
        versions=[
            SequenceVersion(str(name), str(digest), int(runs), str(first))
            for name, digest, runs, first in store.sequence_versions(where)
        ],
    )


def _findings_pareto(
    store: ResultStore, failed_runs: list[int], any_proofs: bool
) -> tuple[pd.DataFrame | None, str]:
    """Every finding of the failed harness runs by kind, from each proof's own record (no
    diagnosis needed), and what the counts are; None where no harness proof is among the
    runs.  A failed run whose record names no finding counts once as such."""
    if not any_proofs:
        return None, "no harness proof among these runs"
    kinds = Counter[str]()
    for run_id in failed_runs:
        found = harness_findings(store.steps(run_id))
        kinds.update(found or {NO_FINDING: 1})
    total = sum(kinds.values())
    runs = len(failed_runs)
    return pareto(kinds, "finding_kind"), (
        f"{total} finding{'s' if total != 1 else ''} of {runs} failed harness "
        f"run{'s' if runs != 1 else ''}: every finding of a run counts, not one per run"
    )


def undecided_causes(runs: pd.DataFrame) -> pd.DataFrame:
    """(cause, runs) of the runs that decided nothing, most first: as the screen rule has it,
    a run that did not complete or could not measure (``rig.screening``)."""
    causes = Counter(
        undecided_cause(
            str(row.status),
            str(row.reason or ""),
            row.end_cause if isinstance(row.end_cause, str) else None,
            answered_no=bool(row.answered_no),
            reference_failed=bool(row.reference_failed),
        )
        for row in runs.itertuples(index=False)
        if run_decision(row) == UNDECIDED
    )
    items = sorted(causes.items(), key=lambda kv: (-kv[1], kv[0]))
    return pd.DataFrame(
        {"cause": [k for k, _ in items], "runs": pd.Series([v for _, v in items], dtype="int64")}
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
        for run_id, _, value, _, _, _, part, operator, trial, _ in rows
    ]
    return gauge_rr(observations)
