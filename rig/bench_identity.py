"""Who answers at each address of a station: asked once when the bench is opened, and checked.

A meter that is off or at a wrong address would otherwise be found only once a run had begun, and
that run would be charged to the unit on the bench.  Each instrument is asked who it is (``*IDN?``,
IEEE 488.2-1992 §10.14; the relay box's ``WHO``) with the one retry the engine allows a transient
fault; what it answers is then the identity every run on the opened bench records, and is compared
with what the station file says should be there (``expect_identity``).
"""

from __future__ import annotations

import logging
from collections.abc import Mapping
from itertools import combinations

from drivers.base import Instrument, InstrumentIdentity
from rig.errors import (
    InstrumentConnectionLost,
    InstrumentError,
    InstrumentProtocolError,
    InstrumentTimeout,
    InstrumentUnreachable,
    RigError,
)
from rig.instrument_faults import ROLE_WORDS, address_text, is_transient, nothing_answers

log = logging.getLogger(__name__)


class BenchRefused(RigError):
    """An instrument of the station does not answer, or is not the one the station names; nothing
    was run and nothing recorded."""


def reply_text(identity: InstrumentIdentity) -> str:
    """The identity as the instrument sent it: its four fields joined by commas."""
    return ",".join((identity.manufacturer, identity.model, identity.serial, identity.firmware))


def matches(identity: InstrumentIdentity, expected: str) -> bool:
    """Whether ``expected`` is in the identity reply, letter case aside: a serial number or a
    model is enough, and makers differ in the case they answer in."""
    return expected.strip().casefold() in reply_text(identity).casefold()


def ask_identity(role: str, instrument: Instrument) -> InstrumentIdentity:
    """The instrument's identity, asked again once after a transient fault (a garbled or lost
    reply, as the engine retries any step); ``BenchRefused`` in plain words where it still
    cannot be read."""
    try:
        return instrument.identity()
    except InstrumentError as first:
        # nothing listening is no passing fault: the instrument is off or the address wrong
        if isinstance(first, InstrumentUnreachable) or not is_transient(first, supply_name=""):
            raise BenchRefused(not_answering(role, instrument.resource, first)) from first
        log.warning("%s: identity not read, asking once more: %s", role, first)
    try:
        return instrument.identity()
    except InstrumentError as exc:
        raise BenchRefused(not_answering(role, instrument.resource, exc)) from exc


def not_answering(role: str, resource: str, exc: InstrumentError) -> str:
    """Why ``role`` could not say who it is, as a technician acts on it."""
    who = ROLE_WORDS.get(role, role)
    where = address_text(resource)
    if isinstance(exc, InstrumentUnreachable):
        text = nothing_answers(who, resource, exc.message)
    elif isinstance(exc, InstrumentTimeout):
        text = (
            f"{who} at {where} did not answer when asked who it is ({exc.message}): is it on, "
            "is its cable in, and is the address right?"
        )
    elif isinstance(exc, InstrumentProtocolError) and role == "relay_box":
        text = (
            f"{who} at {where} does not say who it is as rig reads it ({exc.message}): its WHO "
            "answer's id= needs four comma-separated fields, maker, model, serial, firmware "
            "(docs/relay-box-protocol.md)"
        )
    elif isinstance(exc, InstrumentProtocolError):
        text = (
            f"what answers at {where} does not say who it is as an instrument does ({exc.message};"
            " IEEE 488.2 gives four comma-separated fields: maker, model, serial, firmware): "
            f"is the address of {who} right?"
        )
    elif isinstance(exc, InstrumentConnectionLost):
        text = (
            f"the connection to {who} at {where} dropped while it was asked who it is "
            f"({exc.message}): check its cable or network link"
        )
    else:
        text = f"{who} at {where} could not be asked who it is ({exc.message})"
    return text


def identity_problems(
    identities: Mapping[str, InstrumentIdentity], expected: Mapping[str, str]
) -> list[tuple[str, str]]:
    """What is wrong with who answered, role by role (empty when all is as the station says):
    an instrument that is another role's (addresses swapped), one that is not the one stated,
    two addresses that reach the same instrument."""
    problems: list[tuple[str, str]] = []
    for role, identity in identities.items():
        own = expected.get(role, "")
        others = [
            other
            for other, text in expected.items()
            if other != role and text and matches(identity, text)
        ]
        if own and matches(identity, own):
            continue
        if others:
            problems.append(
                (
                    role,
                    f"the instrument there answers as the station's {others[0]} "
                    f"({reply_text(identity)!r} contains its expect_identity "
                    f"{expected[others[0]]!r}): are the addresses swapped?",
                )
            )
        elif own:
            problems.append(
                (
                    role,
                    f"the instrument there answers {reply_text(identity)!r}, which does not "
                    f"contain expect_identity {own!r}: is the address right, or was the "
                    "instrument exchanged (the calibration date stated for it would be another's)?",
                )
            )
    for first, second in combinations(identities, 2):
        if identities[first] == identities[second]:
            problems.append(
                (
                    second,
                    f"it answers as the same instrument as the {first} "
                    f"({reply_text(identities[first])!r}): one of the two addresses is wrong",
                )
            )
    return problems
