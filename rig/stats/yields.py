"""First-pass and final yield per sequence and per day, and the outcome of returned-unit screens.

A unit is counted once per sequence, by its serial.  First-pass yield: the share of units whose
first run passed; final yield: the share whose last run passed (common practice, no published
source).  A run passes when it completed with a verdict of pass or conditional pass (ILAC-G8
wording); an aborted run counts as not passed.  Pure: takes a DataFrame of runs.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
import pandas as pd

from rig.screening import CONFIRMED, INCONCLUSIVE, NO_FAULT, decision_word, stored_evidence

RUN_COLUMNS = (
    "id",
    "serial",
    "sequence_name",
    "started_at",
    "status",
    "verdict",
    "reason",
    "end_cause",
    "claim",
    "answered_no",
    "confirmed",
    "clear",
    "reference_failed",
)
PASSING = ("pass", "conditional pass")
FAILING = ("fail", "conditional fail")


def runs_frame(rows: Sequence[Sequence[object]]) -> pd.DataFrame:
    """Runs as a DataFrame, in the order the store returned them (oldest first)."""
    frame = pd.DataFrame.from_records([tuple(r) for r in rows], columns=list(RUN_COLUMNS))
    complete = frame["status"].to_numpy() == "complete"
    frame["passed"] = complete & frame["verdict"].isin(PASSING).to_numpy()
    frame["answered_no"] = frame["answered_no"].astype(bool)
    # a run with a question answered no, or whose bench reference failed, decides nothing about
    # the part (``rig.screening``): its fail is no part failure
    reference_failed = frame["reference_failed"].astype(bool).to_numpy()
    undecidable = frame["answered_no"].to_numpy() | reference_failed
    frame["failed"] = complete & frame["verdict"].isin(FAILING).to_numpy() & ~undecidable
    frame["day"] = frame["started_at"].astype(str).str.slice(0, 10)
    return frame


def run_decision(row: Any) -> str:
    """The screen's decision on one run of ``runs_frame`` (``rig.screening``)."""
    found = stored_evidence(row.confirmed, row.clear, row.reference_failed)
    verdict = None if row.verdict is None else str(row.verdict)
    return decision_word(str(row.status), verdict, found, answered_no=bool(row.answered_no))


def units_frame(runs: pd.DataFrame) -> pd.DataFrame:
    """One row per unit (sequence and serial): its first run's day and outcome, its last run's.

    The runs must be in time order; a unit's first and last runs are found by position.
    """
    codes = runs.groupby(["sequence_name", "serial"], sort=False).ngroup().to_numpy()
    _, first = np.unique(codes, return_index=True)
    _, from_end = np.unique(codes[::-1], return_index=True)
    last = len(codes) - 1 - from_end
    return pd.DataFrame(
        {
            "sequence": runs["sequence_name"].to_numpy()[first],
            "day": runs["day"].to_numpy()[first],
            "first_passed": runs["passed"].to_numpy()[first],
            "last_passed": runs["passed"].to_numpy()[last],
            "last_failed": runs["failed"].to_numpy()[last],
            "last_decision": [run_decision(row) for row in runs.iloc[last].itertuples(index=False)],
        }
    )


def yield_by_sequence(runs: pd.DataFrame, units: pd.DataFrame) -> pd.DataFrame:
    """One row per sequence: units, runs, first-pass yield and final yield (fractions);
    ``units`` is ``units_frame(runs)``."""
    per_unit = units.groupby("sequence")
    table = pd.DataFrame(
        {
            "units": per_unit.size(),
            "runs": runs.groupby("sequence_name").size(),
            "first_pass_yield": per_unit["first_passed"].mean(),
            "final_yield": per_unit["last_passed"].mean(),
        }
    )
    return table.rename_axis("sequence").reset_index()


def yield_by_day(units: pd.DataFrame) -> pd.DataFrame:
    """One row per sequence and day of a unit's first run: units, first-pass and final yield."""
    grouped = units.groupby(["sequence", "day"])
    table = pd.DataFrame(
        {
            "units": grouped.size(),
            "first_pass_yield": grouped["first_passed"].mean(),
            "final_yield": grouped["last_passed"].mean(),
        }
    )
    return table.reset_index()


def screen_outcomes(units: pd.DataFrame) -> pd.DataFrame:
    """Per sequence, the decision of each unit's last run: confirmed failure, no fault found,
    inconclusive, undecided (``rig.screening``, the rule a run's own record states).  The
    confirmed share is over the units decided.
    """
    last = units["last_decision"]
    frame = units.assign(
        confirmed=last == CONFIRMED,
        no_fault=last == NO_FAULT,
        inconclusive=last == INCONCLUSIVE,
    )
    grouped = frame.groupby("sequence")
    confirmed = grouped["confirmed"].sum().astype(int)
    no_fault = grouped["no_fault"].sum().astype(int)
    inconclusive = grouped["inconclusive"].sum().astype(int)
    count = grouped.size()
    decided = confirmed + no_fault
    table = pd.DataFrame(
        {
            "units": count,
            "confirmed_failure": confirmed,
            "no_fault_found": no_fault,
            "inconclusive": inconclusive,
            "undecided": count - decided - inconclusive,
            "confirmed_share": (confirmed / decided.where(decided > 0)).astype(float),
        }
    )
    return table.reset_index()
