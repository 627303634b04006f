"""Failure Pareto: which steps, or which diagnosed fault kinds, account for most failures.

Counts sorted from most to least, each with its share and the running (cumulative) share, as a
Pareto chart shows them (common practice, no published source).  Pure.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import pandas as pd


def pareto(counts: Mapping[str, int], column: str) -> pd.DataFrame:
    """Counts per label, largest first (ties by label), with share and cumulative share."""
    items = sorted(
        ((str(k), int(v)) for k, v in counts.items() if v > 0), key=lambda kv: (-kv[1], kv[0])
    )
    table = pd.DataFrame(
        {column: [k for k, _ in items], "count": np.array([v for _, v in items], dtype=np.int64)}
    )
    total = int(table["count"].sum())
    table["share"] = table["count"] / total if total else 0.0
    table["cumulative"] = table["share"].cumsum()
    return table


def fault_kind(spec: str) -> str:
    """The kind of a fault spec: ``open:signal`` -> ``open``; ``drift:map=+12%`` -> ``drift``."""
    return spec.split(":", 1)[0].strip() or spec
