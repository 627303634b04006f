"""Whether a unit about to be tested has runs of the same sequence on record already: a label
scanned twice, or a unit back on the bench, is said before the run (not refused: a retest is
normal, and the record keeps every run)."""

from __future__ import annotations

from pathlib import Path

from rig.stats.filters import RunFilter
from rig.store import ResultStore, StoreError


def tested_before(store_path: Path, serial: str, sequence: str) -> str:
    """A line naming the unit's earlier runs of ``sequence`` in the station's own file (the
    latest with its verdict and start), or empty where there are none or the file cannot be
    read: the notice must never stop a run."""
    if not store_path.is_file():
        return ""
    try:
        store = ResultStore(store_path)
    except StoreError:
        return ""
    try:
        rows = store.run_rows(RunFilter(sequence=sequence, serial_prefix=serial, study=None))
    except StoreError:
        return ""
    finally:
        store.close()
    earlier = [r for r in rows if r[1] == serial]
    if not earlier:
        return ""
    run_id, _, _, started, status, verdict = earlier[-1][:6]
    latest = f"run {run_id}, {verdict or status} ({status}), started {str(started)[:16]}"
    count = f"{len(earlier)} earlier runs" if len(earlier) > 1 else "an earlier run"
    return f"note: {serial} has {count} of {sequence} on this station; the latest: {latest}"
