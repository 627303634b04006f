"""A station clock that is wrong: yield by day and first-pass yield order a unit's runs by their
start, so a clock set back puts a retest before the run it retests.  rig does not refuse a run
for it (the clock may be right and an older run wrong); it says so, naming both times."""

from __future__ import annotations

import datetime as dt
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from rig.store import ResultStore

SKEW_ALLOWED = dt.timedelta(minutes=5)
"""How far the station's clock and the results server's may differ before rig says so."""


def went_back(newest_start: str | None, now: dt.datetime) -> str:
    """A warning where ``now`` is earlier than the newest run's start (ISO 8601), else ''."""
    if not newest_start:
        return ""
    try:
        newest = dt.datetime.fromisoformat(newest_start)
    except ValueError:
        return ""
    if newest.tzinfo is None:
        newest = newest.replace(tzinfo=dt.UTC)
    if now >= newest:
        return ""
    return (
        f"the station's clock ({_shown(now)}) is earlier than the start of the newest run in its "
        f"own file ({_shown(newest)}): check the clock; this run's time orders it among the "
        "unit's runs (first-pass and final yield, yield by day)"
    )


def skew(server_now: dt.datetime, station_now: dt.datetime) -> str:
    """A note where the two clocks differ by more than ``SKEW_ALLOWED``, else ''."""
    apart = station_now - server_now
    if abs(apart) <= SKEW_ALLOWED:
        return ""
    side = "behind" if apart < dt.timedelta(0) else "ahead of"
    return (
        f"the station's clock ({_shown(station_now)}) is {_span(abs(apart))} {side} the results "
        f"server's ({_shown(server_now)}): check the station's clock; runs are ordered by it"
    )


def clock_warnings(store: ResultStore, now: dt.datetime | None = None) -> list[str]:
    """``went_back`` for the station's own store, as a list of warnings to add to a run's;
    none where it cannot be read (a warning must never stop a run)."""
    from rig.store import StoreError

    try:
        newest = store.newest_start()
    except StoreError:
        return []
    said = went_back(newest, now or dt.datetime.now(dt.UTC))
    return [said] if said else []


def _shown(when: dt.datetime) -> str:
    return when.astimezone(dt.UTC).strftime("%Y-%m-%d %H:%M UTC")


def _span(length: dt.timedelta) -> str:
    if length >= dt.timedelta(days=2):
        return f"{length.total_seconds() / 86400:.0f} days"
    if length >= dt.timedelta(hours=2):
        return f"{length.total_seconds() / 3600:.0f} hours"
    return f"{length.total_seconds() / 60:.0f} minutes"
