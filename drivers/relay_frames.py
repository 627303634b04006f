"""Frame codec of the relay-box line protocol (docs/relay-box-protocol.md), shared by both ends.

Pure functions and value classes, no I/O: the driver and the simulator must agree byte for byte, so
both build and parse frames here and nowhere else.
"""

from __future__ import annotations

import enum
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from rig.errors import RigError

SEQ_MODULUS = 0x10000
"""Sequence numbers run 0..65535 and wrap to 0."""

UNTRUSTED_SEQ = "----"
"""Sequence field of an error reply to a frame whose sequence number cannot be trusted."""

TERMINATOR = b"\n"
MAX_COMMAND_LINE = 1024
"""Longest command line the box accepts, terminator included."""

MAX_REPLY_LINE = 8192
"""Longest reply line a host needs to accept, terminator included."""

WATCHDOG_MIN_MS = 20
WATCHDOG_MAX_MS = 600_000

_HEX4 = re.compile(r"[0-9A-F]{4}")
_HEX2 = re.compile(r"[0-9A-F]{2}")
_VERB = re.compile(r"[A-Z]{1,16}")
_DECIMAL = re.compile(r"[0-9]{1,9}")


class ErrorCode(enum.IntEnum):
    """Numeric codes of error replies; 10-19 are frame errors, 20-29 are refused requests."""

    MALFORMED = 10
    BAD_CHECKSUM = 11
    LINE_TOO_LONG = 12
    UNKNOWN_VERB = 13
    BAD_ARGUMENT = 14
    UNKNOWN_RELAY = 20
    COIL_BUDGET = 21
    WATCHDOG_TRIPPED = 22
    OUT_OF_RANGE = 23


class Verb(enum.StrEnum):
    """The command verbs; every one is idempotent so a host may safely repeat any command."""

    WHO = "WHO"
    SET = "SET"
    OPENALL = "OPENALL"
    STATE = "STATE"
    BEAT = "BEAT"
    WDARM = "WDARM"
    WDOFF = "WDOFF"
    COUNTS = "COUNTS"


VERBS_WITH_ARGUMENT = frozenset({Verb.SET, Verb.WDARM})


class FrameError(RigError):
    """A line is not a valid frame; carries the protocol error code and the trusted sequence."""

    def __init__(self, code: ErrorCode, message: str, seq: int | None = None) -> None:
        self.code = code
        self.seq = seq
        super().__init__(message)


@dataclass(frozen=True)
class Command:
    """One host-to-box frame."""

    seq: int
    verb: str
    arg: str = ""


@dataclass(frozen=True)
class Reply:
    """One box-to-host frame: ``ok`` with a payload, or an error with a code and a text.

    ``seq`` is ``None`` for an error reply to a frame whose sequence number was not trusted.
    """

    seq: int | None
    ok: bool
    payload: str = ""
    code: int = 0
    text: str = ""


def _crc8_bitwise(byte: int) -> int:
    """The CRC of one byte from zero, bit by bit (builds the table below)."""
    crc = byte
    for _ in range(8):
        crc = ((crc << 1) ^ 0x07) & 0xFF if crc & 0x80 else (crc << 1) & 0xFF
    return crc


_CRC8_TABLE = bytes(_crc8_bitwise(b) for b in range(256))
"""One lookup per byte instead of eight shifts: a frame's CRC in a few microseconds."""


def crc8(data: bytes) -> int:
    """CRC-8/SMBUS: poly 0x07, init 0x00, not reflected, xorout 0x00 (check value 0xF4)."""
    crc = 0
    table = _CRC8_TABLE
    for byte in data:
        crc = table[crc ^ byte]
    return crc


def next_seq(seq: int) -> int:
    """The sequence number after ``seq`` (65535 wraps to 0)."""
    return (seq + 1) % SEQ_MODULUS


def _check_text(text: str, what: str) -> None:
    for ch in text:
        if not (" " <= ch <= "~") or ch == "*":
            raise FrameError(
                ErrorCode.MALFORMED,
                f"{what} may hold printable ASCII other than '*', found {ch!r} in {text!r}",
            )


def safe_text(text: str, limit: int = 200) -> str:
    """``text`` made fit for an error reply: no '*', only printable ASCII, at most ``limit`` long.

    Error texts quote what was received, and that may hold anything.
    """
    cleaned = "".join(ch if " " <= ch <= "~" and ch != "*" else "?" for ch in text)
    return cleaned[:limit]


def _seal(body: str) -> bytes:
    data = body.encode("ascii")
    return data + b"*" + f"{crc8(data):02X}".encode("ascii") + TERMINATOR


def _check_seq(seq: int) -> None:
    if not 0 <= seq < SEQ_MODULUS:
        raise FrameError(
            ErrorCode.MALFORMED, f"sequence number must be 0..65535, found {seq}", None
        )


def encode_command(command: Command) -> bytes:
    """Build the bytes of a command frame, terminator included."""
    _check_seq(command.seq)
    if not _VERB.fullmatch(command.verb):
        raise FrameError(
            ErrorCode.MALFORMED, f"verb must be 1-16 capital letters, found {command.verb!r}"
        )
    if command.arg and (" " in command.arg):
        raise FrameError(ErrorCode.MALFORMED, f"argument may not hold spaces: {command.arg!r}")
    _check_text(command.arg, "argument")
    body = f"{command.seq:04X} {command.verb}" + (f" {command.arg}" if command.arg else "")
    return _seal(body)


def encode_reply(reply: Reply) -> bytes:
    """Build the bytes of a reply frame, terminator included."""
    if reply.seq is None:
        if reply.ok:
            raise FrameError(ErrorCode.MALFORMED, "an OK reply must carry a sequence number")
        seq = UNTRUSTED_SEQ
    else:
        _check_seq(reply.seq)
        seq = f"{reply.seq:04X}"
    if reply.ok:
        _check_text(reply.payload, "payload")
        body = f"{seq} OK" + (f" {reply.payload}" if reply.payload else "")
    else:
        _check_text(reply.text, "error text")
        if not 0 <= reply.code <= 999:
            raise FrameError(ErrorCode.MALFORMED, f"error code must be 0..999, found {reply.code}")
        body = f"{seq} ERR {reply.code} {reply.text}".rstrip()
    return _seal(body)


def _unseal(line: bytes, limit: int) -> str:
    """Check length, characters and checksum; return the body (the part before ``*``)."""
    if len(line) > limit:
        raise FrameError(
            ErrorCode.LINE_TOO_LONG, f"line is {len(line)} bytes, at most {limit} allowed"
        )
    if not line.endswith(TERMINATOR):
        raise FrameError(ErrorCode.MALFORMED, f"line does not end with LF: {line[-20:]!r}")
    raw = line[:-1]
    if any(not 0x20 <= b <= 0x7E for b in raw):
        raise FrameError(
            ErrorCode.MALFORMED, f"line holds bytes outside printable ASCII: {raw[:60]!r}"
        )
    text = raw.decode("ascii")
    body, star, check = text.rpartition("*")
    if not star or not _HEX2.fullmatch(check):
        raise FrameError(
            ErrorCode.MALFORMED,
            "expected the checksum separator and two capital hex digits at the end, "
            f"found {text[-20:]!r}",
        )
    if "*" in body:
        raise FrameError(
            ErrorCode.MALFORMED, f"the checksum separator may appear only once, found {text[:60]!r}"
        )
    expected = crc8(body.encode("ascii"))
    if int(check, 16) != expected:
        raise FrameError(
            ErrorCode.BAD_CHECKSUM,
            f"checksum {check} does not match the frame (computed {expected:02X})",
        )
    return body


def decode_command(line: bytes) -> Command:
    """Parse a command line (terminator included); raise ``FrameError`` naming what is wrong.

    The error's ``seq`` is set only when the checksum was right and the sequence field readable.
    """
    body = _unseal(line, MAX_COMMAND_LINE)
    seq_text, sep, rest = body.partition(" ")
    if not sep or not _HEX4.fullmatch(seq_text):
        raise FrameError(
            ErrorCode.MALFORMED,
            f"expected 4 capital hex digits of sequence number and a space, found {body[:20]!r}",
        )
    seq = int(seq_text, 16)
    parts = rest.split(" ")
    if len(parts) > 2 or not _VERB.fullmatch(parts[0]):
        raise FrameError(
            ErrorCode.MALFORMED,
            f"expected a verb of capital letters and at most one argument, found {rest!r}",
            seq,
        )
    arg = parts[1] if len(parts) == 2 else ""
    if len(parts) == 2 and not arg:
        raise FrameError(ErrorCode.MALFORMED, "empty argument after the verb", seq)
    return Command(seq=seq, verb=parts[0], arg=arg)


def decode_reply(line: bytes) -> Reply:
    """Parse a reply line (terminator included); raise ``FrameError`` naming what is wrong."""
    body = _unseal(line, MAX_REPLY_LINE)
    seq_text, _, rest = body.partition(" ")
    if seq_text == UNTRUSTED_SEQ:
        seq: int | None = None
    elif _HEX4.fullmatch(seq_text):
        seq = int(seq_text, 16)
    else:
        raise FrameError(ErrorCode.MALFORMED, f"reply has no sequence field: {body[:20]!r}")
    status, _, payload = rest.partition(" ")
    if status == "OK":
        if seq is None:
            raise FrameError(ErrorCode.MALFORMED, f"an OK reply must carry a sequence: {body!r}")
        return Reply(seq=seq, ok=True, payload=payload)
    if status == "ERR":
        code_text, _, text = payload.partition(" ")
        if not _DECIMAL.fullmatch(code_text) or len(code_text) > 3:
            raise FrameError(
                ErrorCode.MALFORMED, f"error reply needs a numeric code, found {payload!r}"
            )
        return Reply(seq=seq, ok=False, code=int(code_text), text=text)
    raise FrameError(ErrorCode.MALFORMED, f"reply status must be OK or ERR, found {status!r}")


# ---- payloads and arguments -------------------------------------------------------------------


def format_relays(relays: Iterable[int]) -> str:
    """Relay list as sent on the line: ascending decimals joined by commas, ``-`` for none."""
    ordered = sorted(set(relays))
    return ",".join(str(r) for r in ordered) if ordered else "-"


def parse_relays(text: str) -> list[int]:
    """Parse a relay list (``-`` or comma-separated decimals); duplicates are an error."""
    if text == "-":
        return []
    items = text.split(",")
    relays: list[int] = []
    for item in items:
        if not _DECIMAL.fullmatch(item):
            raise FrameError(
                ErrorCode.BAD_ARGUMENT,
                f"relay list must be '-' or decimals joined by commas, found {item!r} in {text!r}",
            )
        relays.append(int(item))
    if len(set(relays)) != len(relays):
        raise FrameError(ErrorCode.BAD_ARGUMENT, f"relay list names a relay twice: {text!r}")
    return relays


class WatchdogMode(enum.StrEnum):
    OFF = "off"
    ARMED = "armed"
    TRIPPED = "tripped"


@dataclass(frozen=True)
class BoxState:
    """Payload of the ``STATE`` reply."""

    closed: frozenset[int]
    watchdog: WatchdogMode
    watchdog_ms: int


def format_state(state: BoxState) -> str:
    return (
        f"closed={format_relays(state.closed)} wd={state.watchdog.value} wd_ms={state.watchdog_ms}"
    )


def _fields(payload: str, keys: Sequence[str]) -> dict[str, str]:
    parts = payload.split(" ", len(keys) - 1)
    found: dict[str, str] = {}
    for key, part in zip(keys, parts, strict=False):
        name, eq, value = part.partition("=")
        if name != key or not eq:
            break
        found[key] = value
    if list(found) != list(keys):
        wanted = " ".join(f"{k}=..." for k in keys)
        raise FrameError(ErrorCode.MALFORMED, f"expected payload '{wanted}', found {payload!r}")
    return found


def parse_state(payload: str) -> BoxState:
    fields = _fields(payload, ("closed", "wd", "wd_ms"))
    try:
        mode = WatchdogMode(fields["wd"])
    except ValueError:
        raise FrameError(
            ErrorCode.MALFORMED, f"wd must be off, armed or tripped, found {fields['wd']!r}"
        ) from None
    if not _DECIMAL.fullmatch(fields["wd_ms"]):
        raise FrameError(ErrorCode.MALFORMED, f"wd_ms must be decimal, found {fields['wd_ms']!r}")
    return BoxState(frozenset(parse_relays(fields["closed"])), mode, int(fields["wd_ms"]))


@dataclass(frozen=True)
class BoxInfo:
    """Payload of the ``WHO`` reply: relay count, coil budget, identity text."""

    relays: int
    budget: int
    identity: str


def format_info(info: BoxInfo) -> str:
    return f"relays={info.relays} budget={info.budget} id={info.identity}"


def parse_info(payload: str) -> BoxInfo:
    fields = _fields(payload, ("relays", "budget", "id"))
    for key in ("relays", "budget"):
        if not _DECIMAL.fullmatch(fields[key]):
            raise FrameError(ErrorCode.MALFORMED, f"{key} must be decimal, found {fields[key]!r}")
    return BoxInfo(int(fields["relays"]), int(fields["budget"]), fields["id"])


def format_counts(counts: Sequence[int]) -> str:
    """Operation counts of relays 1..N, in order, joined by commas."""
    return ",".join(str(c) for c in counts)


def parse_counts(payload: str) -> list[int]:
    items = payload.split(",")
    if not all(_DECIMAL.fullmatch(i) for i in items):
        raise FrameError(
            ErrorCode.MALFORMED, f"counts must be decimals separated by commas, found {payload!r}"
        )
    return [int(i) for i in items]


def parse_watchdog_ms(text: str) -> int:
    """Parse the ``WDARM`` argument: whole milliseconds within the accepted range."""
    if not _DECIMAL.fullmatch(text):
        raise FrameError(
            ErrorCode.BAD_ARGUMENT, f"watchdog timeout must be whole milliseconds, found {text!r}"
        )
    ms = int(text)
    if not WATCHDOG_MIN_MS <= ms <= WATCHDOG_MAX_MS:
        raise FrameError(
            ErrorCode.OUT_OF_RANGE,
            f"watchdog timeout must be {WATCHDOG_MIN_MS}..{WATCHDOG_MAX_MS} ms, found {ms}",
        )
    return ms
