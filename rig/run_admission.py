"""Whether a run may be filed under a serial number and an operator.  The commands ask before
any instrument is opened; the engine asks again, so that no front end or script can record a
run that cannot be found again, or one with no name where the station requires who tested."""

from __future__ import annotations

import unicodedata

from rig.config.station import Station
from rig.errors import RigError


class RunRefused(RigError):
    """A run may not start: its record would break the station's rules for records."""


SERIAL_MAX_CHARS = 64
"""The longest serial number kept: longer than any label a shop prints (common practice, no
published source), short enough for a column of ``rig runs``."""


def serial_problem(serial: str) -> str:
    """Why ``serial`` cannot name the unit in a record, or empty when it can: a run filed under
    a blank serial cannot be found again.  What else a serial holds is kept as given (escaped
    where it is shown, ``rig.entry_text``): a record never loses what it was filed under."""
    return "" if serial.strip() else "the unit's serial number is blank; give it"


def entered_serial_problem(serial: str) -> str:
    """``serial_problem``, and, for a serial a person types or scans, one with a control
    character (a scanner set to send a tab) or longer than ``SERIAL_MAX_CHARS``: it cannot be
    typed again to find the run, and it breaks the tables that list it.  The commands and the
    console ask this before a run."""
    blank = serial_problem(serial)
    if blank:
        return blank
    if len(serial) > SERIAL_MAX_CHARS:
        return (
            f"a serial number has at most {SERIAL_MAX_CHARS} characters; this one has {len(serial)}"
        )
    return _control_problem("serial number", serial, allowed="")


def operator_problem(station: Station, operator: str) -> str:
    """Why a run may not start under ``operator``, or empty when it may: a station that must
    record who tested each unit refuses a run with no name."""
    if not station.operator_required or operator.strip():
        return ""
    return (
        f"{station.path} sets operator_required = true under [station]: give --operator NAME "
        "(who tests; it is recorded with the run)"
    )


CLAIM_MAX_CHARS = 200
"""The longest claim or return number kept with a run: room for any such reference (common
practice, no published source), short enough for a column of ``rig runs``."""
REMARK_MAX_CHARS = 2000
"""The longest remark kept with a run: a paragraph, not a report."""


def _free_text_problem(what: str, text: str, most: int, *, lines: bool) -> str:
    """Why ``text`` cannot be kept as the run's ``what``, or empty when it can: printable text
    (line breaks and tabs too where ``lines``) of at most ``most`` characters.  Bytes that are
    not UTF-8 are kept as the serial's are (``rig.entry_text``)."""
    if len(text) > most:
        return f"the {what} is {len(text)} characters long; at most {most} are kept"
    problem = _control_problem(what, text, allowed="\n\r\t" if lines else "")
    if problem:
        return problem
    if text and not text.strip():
        return f"the {what} is blank; give its text, or leave it out"
    return ""


def _control_problem(what: str, text: str, *, allowed: str) -> str:
    """Where ``text`` holds a control character other than ``allowed``, in words; else empty."""
    for position, char in enumerate(text, start=1):
        if unicodedata.category(char) == "Cc" and char not in allowed:
            expected = (
                "printable text (line breaks allowed)" if allowed else "printable text on one line"
            )
            return (
                f"the {what} holds a control character (U+{ord(char):04X}) at character "
                f"{position}; expected {expected}"
            )
    return ""


def claim_problem(claim: str) -> str:
    """Why ``claim`` cannot be kept as the run's claim or return number, or empty."""
    return _free_text_problem("claim or return number", claim, CLAIM_MAX_CHARS, lines=False)


def remark_problem(remark: str) -> str:
    """Why ``remark`` cannot be kept as the run's remark, or empty."""
    return _free_text_problem("remark", remark, REMARK_MAX_CHARS, lines=True)


def refuse_unfiled(
    station: Station,
    serial: str,
    operator: str,
    *,
    continuing: bool,
    claim: str = "",
    remark: str = "",
) -> None:
    """Raise ``RunRefused`` where the run could not be filed (a continued run keeps the serial
    of its record, so only its operator is asked about), or its claim or remark not kept."""
    problem = (
        ("" if continuing else serial_problem(serial))
        or operator_problem(station, operator)
        or claim_problem(claim)
        or remark_problem(remark)
    )
    if problem:
        raise RunRefused(problem)
