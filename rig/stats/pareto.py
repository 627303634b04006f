"""Failure Pareto: which steps, diagnosed fault kinds or harness findings account for most
failures.

Counts sorted from most to least, each with its share and the running (cumulative) share, as a
Pareto chart shows them (common practice, no published source).  Pure.
"""

from __future__ import annotations

import json
from collections import Counter
from collections.abc import Iterable, Mapping
from typing import Any

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


FOUND = "found "
"""A harness proof's extras key per finding kind (``found swap``), its value how many."""
UNREADABLE = "record unreadable"
"""A harness proof whose stored extras are not JSON (a damaged record): counted as such."""
NO_FINDING = "no finding recorded"
"""A failed harness run whose record names no finding (a capture that found no nets, say)."""


def harness_findings(steps: Iterable[Mapping[str, Any]]) -> Counter[str]:
    """Every finding of one harness run by kind, from its ``harness-proof`` steps' extras: a
    run with a swap, an open splice and a high-resistance wire counts each of the three (the
    proof names its faults itself; there is no diagnosis of it to take one from)."""
    found: Counter[str] = Counter()
    for step in steps:
        extras = step.get("extras") or {}
        if step.get("kind") != "harness-proof":
            continue
        if isinstance(extras, str):  # as the store keeps it
            try:
                extras = json.loads(extras)
            except ValueError:  # a damaged record is counted, not a reason to stop
                found[UNREADABLE] += 1
                continue
        if not isinstance(extras, Mapping):
            continue
        for key, count in extras.items():
            if key.startswith(FOUND) and isinstance(count, int | float) and count > 0:
                found[key.removeprefix(FOUND)] += int(count)
    return found
