"""Whether a run may be filed under a serial number and an operator.  The commands ask before
any instrument is opened; the engine asks again, so that no front end or script can record a
run that cannot be found again, or one with no name where the station requires who tested."""

from __future__ import annotations

from rig.config.station import Station
from rig.errors import RigError


class RunRefused(RigError):
    """A run may not start: its record would break the station's rules for records."""


def serial_problem(serial: str) -> str:
    """Why ``serial`` cannot name the unit in a record, or empty when it can: a run filed under
    a blank serial cannot be found again."""
    return "" if serial.strip() else "the unit's serial number is blank; give it"


def operator_problem(station: Station, operator: str) -> str:
    """Why a run may not start under ``operator``, or empty when it may: a station that must
    record who tested each unit refuses a run with no name."""
    if not station.operator_required or operator.strip():
        return ""
    return (
        f"{station.path} sets operator_required = true under [station]: give --operator NAME "
        "(who tests; it is recorded with the run)"
    )


def refuse_unfiled(station: Station, serial: str, operator: str, *, continuing: bool) -> None:
    """Raise ``RunRefused`` where the run could not be filed (a continued run keeps the serial
    of its record, so only its operator is asked about)."""
    problem = ("" if continuing else serial_problem(serial)) or operator_problem(station, operator)
    if problem:
        raise RunRefused(problem)
