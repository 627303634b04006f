"""What to do about an instrument fault in the middle of a run, and how to say it in plain words.

A fault of the link (no reply, a dropped connection, a garbled reply) or an error the meter
reported after a configuration is often cured by trying the step once more from the safe state;
the engine does that once and notes it.  Some faults must not be repeated: an error the supply
reports (an over-current trip among them) means the unit may draw too much current, and powering it
again before someone looks is unsafe (common practice, no published source).
"""

from __future__ import annotations

import re

from rig.errors import (
    InstrumentConnectionLost,
    InstrumentError,
    InstrumentProtocolError,
    InstrumentReportedError,
    InstrumentTimeout,
    InstrumentUnreachable,
    SettingRefused,
)

ROLE_WORDS = {"dmm": "the DMM", "supply": "the supply", "relay_box": "the relay box"}

_SOCKET = re.compile(r"TCPIP\d*::(?P<host>[^:]+)::(?P<port>\d+)::SOCKET", re.IGNORECASE)


def address_text(resource: str) -> str:
    """``host:port`` for a raw-socket VISA resource (what a technician checks on the meter's
    front panel), else the resource as written."""
    found = _SOCKET.fullmatch(resource.strip())
    return f"{found['host']}:{found['port']}" if found else resource


def nothing_answers(who: str, resource: str, detail: str = "") -> str:
    """Nothing listens at the address of ``who``: said in the same words when the bench opens
    (``rig.bench_identity``) and mid-run (``plain_reason``), with the address as it is set on
    the instrument and the two things a technician checks."""
    where = address_text(resource) if resource else f"the address of {who}"
    said = f" ({detail})" if detail else ""
    return f"nothing answers at {where}{said}: is {who} on and is the address right?"


class SupplyWentOff(InstrumentReportedError):
    """The supply's output read off at the end of a powered step: it tripped or was switched off."""


def is_transient(exc: InstrumentError, *, supply_name: str) -> bool:
    """Whether one retry from the safe state may cure ``exc`` (and is safe to try)."""
    if isinstance(exc, SupplyWentOff):
        return False
    if isinstance(exc, InstrumentReportedError) and exc.instrument == supply_name:
        return False
    return isinstance(
        exc,
        InstrumentTimeout
        | InstrumentConnectionLost
        | InstrumentProtocolError
        | InstrumentReportedError,
    )


def _who(exc: InstrumentError) -> str:
    if exc.instrument in ROLE_WORDS:
        return ROLE_WORDS[exc.instrument]
    return f"instrument {exc.instrument}" if exc.instrument else "an instrument"


def plain_reason(exc: InstrumentError) -> str:
    """One sentence a technician can act on, with the technical detail after it."""
    who = _who(exc)
    command = f" to {exc.command!r}" if exc.command else ""
    if isinstance(exc, SupplyWentOff):
        text = (
            "the supply's output went off during a powered step (over-current trip?): the unit "
            "may draw too much current; find the cause before powering it again"
        )
    elif isinstance(exc, SettingRefused) and exc.instrument == "supply":
        text = (
            f"the supply refused the command {exc.command!r}: it cannot be set to what the step "
            "asks; check the step's supply voltage and current limit against the supply's ranges"
        )
    elif isinstance(exc, InstrumentReportedError) and exc.instrument == "supply":
        text = (
            f"the supply reported an error{command}; if its over-current protection tripped, the "
            "unit may draw too much current: find the cause before powering it again"
        )
    elif isinstance(exc, InstrumentTimeout):
        text = f"{who} did not answer in time{command}; check that it is on and its cable is in"
    elif isinstance(exc, InstrumentUnreachable):
        text = nothing_answers(who, exc.resource)  # the command and message in the details
    elif isinstance(exc, InstrumentConnectionLost):
        text = f"the connection to {who} was lost{command}; check its cable or network link"
    elif isinstance(exc, InstrumentProtocolError):
        text = (
            f"{who} sent a reply that could not be understood{command}; check the cable for "
            "interference and the instrument's settings"
        )
    elif isinstance(exc, InstrumentReportedError):
        text = f"{who} reported an error{command}; its message is in the details"
    else:
        text = f"{who} did not do what was asked{command}"
    return f"{text} (details: {exc})"
