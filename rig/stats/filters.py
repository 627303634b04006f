"""Which runs the statistics cover: sequence, station, date range and serial prefix."""

from __future__ import annotations

import datetime as dt
import re
from dataclasses import dataclass

from rig.errors import RigError


class FilterError(RigError):
    """A filter argument that cannot be understood (the message names the argument)."""


@dataclass(frozen=True)
class RunFilter:
    """Empty fields match everything; dates are UTC days, both ends included."""

    sequence: str | None = None
    station: str | None = None
    since: dt.date | None = None
    until: dt.date | None = None
    serial_prefix: str | None = None
    study: bool | None = False
    """False: production runs only (no gauge-study runs); True: study runs only; None: both."""
    sequence_hash: str | None = None
    """The start of a sequence version's content hash (``rig stats`` names the versions)."""

    def started_from(self) -> str | None:
        """The earliest ``started_at`` included, as the ISO text the store keeps."""
        return None if self.since is None else self.since.isoformat()

    def started_before(self) -> str | None:
        """The first ``started_at`` excluded (the day after ``until``)."""
        return None if self.until is None else (self.until + dt.timedelta(days=1)).isoformat()


def parse_day(text: str, argument: str) -> dt.date:
    """A date given on the command line, as YYYY-MM-DD."""
    try:
        return dt.date.fromisoformat(text.strip())
    except ValueError:
        raise FilterError(
            f"{argument}: expected a date as YYYY-MM-DD (for example 2026-03-01), got {text!r}"
        ) from None


def make_filter(
    *,
    sequence: str | None = None,
    station: str | None = None,
    since: str | None = None,
    until: str | None = None,
    serial_prefix: str | None = None,
    study: bool = False,
    sequence_hash: str | None = None,
) -> RunFilter:
    """A filter from command-line text, with the date range checked."""
    since_day = None if since is None else parse_day(since, "--since")
    until_day = None if until is None else parse_day(until, "--until")
    if since_day and until_day and until_day < since_day:
        raise FilterError(f"--until {until_day} is before --since {since_day}")
    version = None if sequence_hash is None else sequence_hash.strip().lower()
    if version is not None and not re.fullmatch(r"[0-9a-f]{1,64}", version):
        raise FilterError(
            f"--sequence-hash: expected the start of a version's hash in hex digits, as rig "
            f"stats names the versions (for example 54badb1e5), got {sequence_hash!r}"
        )
    return RunFilter(
        sequence, station, since_day, until_day, serial_prefix or None, study, version or None
    )
