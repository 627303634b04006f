"""An instrument's or a reference's calibration due date, read the same way in every table."""

from __future__ import annotations

import datetime as dt

from rig.config.reader import Section


def read_calibration(sec: Section) -> tuple[dt.date | None, bool]:
    """``calibration_due`` (a TOML date; None where not given or wrong, a problem) and
    ``allow_past_due``: whether a run may go on past that date, with a note."""
    due = sec.raw("calibration_due")
    if due is not None and not isinstance(due, dt.date):
        sec.problem("calibration_due", f"expected a TOML date such as 2027-06-30, found {due!r}")
        due = None
    if isinstance(due, dt.datetime):
        due = due.date()
    return due, sec.boolean("allow_past_due", False)
