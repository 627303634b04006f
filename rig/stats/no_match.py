"""Why a statistics filter matched no run, in words: a misspelt sequence or station name is
named with the names the store holds, and a filter of valid names that matches nothing says how
many runs each of its parts shuts out.  Empty tables and "0 runs" would let a typo pass for a
shop with no production."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import replace
from typing import Any

from rig.stats.filters import RunFilter

NAMES = (("sequence", "--sequence"), ("station", "--station-name"))
"""The name filters, in the order ``ResultStore.run_names`` gives their columns."""
OTHERS = (
    ("since", "--since"),
    ("until", "--until"),
    ("serial_prefix", "--serial-prefix"),
    ("sequence_hash", "--sequence-hash"),
)

HeldNames = Callable[[RunFilter], Sequence[Sequence[Any]]]
"""``ResultStore.run_names``: (sequence, station, runs, first start, last start) per pair."""


def _kind(where: RunFilter) -> str:
    return "gauge-study" if where.study else "production"


def unknown_names(where: RunFilter, held: HeldNames) -> str:
    """Each name filter that names no run of its kind in the store, with the names it holds;
    empty where every name given is held."""
    rows = held(RunFilter(study=where.study))
    found = []
    for column, (field, argument) in enumerate(NAMES):
        value = getattr(where, field)
        known = sorted({str(row[column]) for row in rows})
        if value is not None and value not in known:
            found.append(
                f"{argument} {value!r}: no {_kind(where)} run has that {field} name; "
                f"known: {', '.join(known) or 'none'}"
            )
    return "; ".join(found)


def _without(where: RunFilter, field: str) -> RunFilter:
    cleared: dict[str, Any] = {field: None}
    return replace(where, **cleared)


def no_match_text(where: RunFilter, held: HeldNames, store: str) -> str:
    """What a filter of valid names that matches no run shuts out: for each part given, the
    runs that match without it, and the days the store's runs were started on."""
    given = [(f, a) for f, a in (*NAMES, *OTHERS) if getattr(where, f) is not None]
    if not given:
        return f"no {_kind(where)} runs in {store}"

    def runs(rows: Sequence[Sequence[Any]]) -> int:
        return sum(int(row[2]) for row in rows)

    parts = [f"without {a}: {runs(held(_without(where, f)))}" for f, a in given]
    rows = held(RunFilter(study=where.study))
    if rows:
        first = min(str(row[3]) for row in rows)[:10]
        last = max(str(row[4]) for row in rows)[:10]
        parts.append(f"the store's {runs(rows)} runs were started from {first} to {last}")
    named = " ".join(f"{a} {getattr(where, f)}" for f, a in given)
    return f"no {_kind(where)} run matches {named} ({'; '.join(parts)})"
