"""A generic SCPI-99 / IEEE 488.2 instrument core: command tree, parser, error queue, status bytes.

The simulated DMM and supply declare their commands as header patterns
(``[SENSe:]VOLTage[:DC]:RANGe``) with a handler each; everything the standards say about parsing,
the path rule of compound lines, parameters, the error queue and the status registers lives here
once, so both instruments answer a malformed line exactly as the standard says and keep serving.
"""

from __future__ import annotations

import logging
import math
import re
import threading
from collections import deque
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import ClassVar

from drivers.base import InstrumentIdentity
from rig.sim.scpi_errors import ScpiError, esr_bit

log = logging.getLogger(__name__)

Handler = Callable[["Call"], str | None]

#: IEEE 488.2-1992 §7.6.1.4: a program mnemonic has at most 12 characters.
MAX_MNEMONIC = 12
#: Depth of the error queue; SCPI-1999 asks for at least two entries, bench meters hold about 20.
ERROR_QUEUE_DEPTH = 20

_MNEMONIC = re.compile(r"([A-Za-z][A-Za-z_]*?)(\d*)")
_PATTERN_PART = re.compile(r"\[:?([A-Za-z]+(?:#\d+)?):?\]|:?([A-Za-z]+(?:#\d+)?)")
_HEADER = re.compile(r":?[A-Za-z][A-Za-z0-9_]*(?::[A-Za-z][A-Za-z0-9_]*)*\??")
_COMMON_HEADER = re.compile(r"\*[A-Za-z]+\??")
_HEADER_CHARS = re.compile(r"[A-Za-z0-9_:?*]*")
_NUMBER = re.compile(r"([+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?)\s*([A-Za-z]*)")
_CHAR_DATA = re.compile(r"[A-Za-z][A-Za-z0-9_]*")

#: Suffix multipliers, IEEE 488.2-1992 §7.7.3.4 table 7-1 (note: M is milli, MA is mega).
_MULTIPLIERS: dict[str, float] = {
    "EX": 1e18,
    "PE": 1e15,
    "T": 1e12,
    "G": 1e9,
    "MA": 1e6,
    "K": 1e3,
    "M": 1e-3,
    "U": 1e-6,
    "N": 1e-9,
    "P": 1e-12,
    "F": 1e-15,
    "A": 1e-18,
}
#: The two units where a plain M means mega (IEEE 488.2-1992 §7.7.3.4).
_MEGA_UNITS = frozenset({"OHM", "HZ"})


# --------------------------------------------------------------------------- mnemonics and the tree


@dataclass(frozen=True)
class Mnemonic:
    """One node name: the short form is the upper-case part of the long form."""

    long: str
    short: str
    suffix_max: int = 0

    @classmethod
    def parse(cls, text: str) -> Mnemonic:
        """``VOLTage`` -> VOLTAGE/VOLT; ``OUTPut#2`` also accepts numeric suffixes 1..2."""
        name, _, suffix = text.partition("#")
        short = "".join(c for c in name if c.isupper())
        if not short:
            raise ValueError(f"mnemonic {text!r} has no upper-case short form")
        return cls(name.upper(), short, int(suffix) if suffix else 0)

    def match(self, token: str) -> int | None:
        """The suffix ``token`` names (1 when absent), -1 if out of range, None if no match."""
        m = _MNEMONIC.fullmatch(token)
        if m is None or m.group(1).upper() not in (self.long, self.short):
            return None
        if not m.group(2):
            return 1
        suffix = int(m.group(2))
        return suffix if 1 <= suffix <= self.suffix_max else -1


def pattern_parts(pattern: str) -> list[tuple[Mnemonic, bool]]:
    """Split ``[SENSe:]VOLTage[:DC]`` into (mnemonic, optional) pairs; a bad pattern is a bug."""
    parts: list[tuple[Mnemonic, bool]] = []
    pos = 0
    for m in _PATTERN_PART.finditer(pattern):
        if m.start() != pos:
            break
        pos = m.end()
        optional = m.group(1) is not None
        parts.append((Mnemonic.parse(m.group(1) or m.group(2)), optional))
    if pos != len(pattern) or not parts:
        raise ValueError(f"bad SCPI header pattern {pattern!r}")
    return parts


def matches_pattern(pattern: str, text: str) -> bool:
    """Whether ``text`` (e.g. the string of ``FUNCtion "VOLT:DC"``) names ``pattern``."""
    parts = pattern_parts(pattern)
    tokens = text.strip().lstrip(":").split(":") if text.strip() else []

    def walk(i: int, j: int) -> bool:
        if j == len(tokens):
            return all(opt for _, opt in parts[i:])
        if i == len(parts):
            return False
        mnemonic, optional = parts[i]
        if mnemonic.match(tokens[j]) == 1 and walk(i + 1, j + 1):
            return True
        return optional and walk(i + 1, j)

    return walk(0, 0)


@dataclass(eq=False)
class Node:
    """A node of the command tree; a leaf has a set and/or a query handler."""

    mnemonic: Mnemonic | None
    optional: bool = False
    children: list[Node] = field(default_factory=list)
    on_set: Handler | None = None
    on_query: Handler | None = None

    def handler(self, query: bool) -> Handler | None:
        return self.on_query if query else self.on_set


@dataclass(frozen=True)
class Resolved:
    """What a header resolved to, and the node the next header of the line starts from."""

    handler: Handler
    suffixes: tuple[int, ...]
    next_start: Node


class CommandTree:
    """The instrument's commands, resolved with SCPI-1999 Vol. 1 §6.2 rules."""

    def __init__(self) -> None:
        self.root = Node(None)

    def add(
        self, pattern: str, *, on_set: Handler | None = None, on_query: Handler | None = None
    ) -> None:
        """Register a header; ``pattern`` ending in ``?`` registers a query-only handler."""
        node = self.root
        for mnemonic, optional in pattern_parts(pattern.rstrip("?")):
            found = next(
                (c for c in node.children if c.mnemonic == mnemonic and c.optional == optional),
                None,
            )
            if found is None:
                found = Node(mnemonic, optional)
                node.children.append(found)
            node = found
        if (on_set and node.on_set) or (on_query and node.on_query):
            raise ValueError(f"header {pattern!r} registered twice")
        node.on_set = on_set or node.on_set
        node.on_query = on_query or node.on_query

    def resolve(self, start: Node, tokens: Sequence[str], query: bool) -> Resolved:
        """Find the handler; -113 if there is none, -114 if only a numeric suffix was wrong."""
        bad_suffix = False

        def search(
            node: Node, rest: Sequence[str], chain: list[tuple[Node, bool, int]]
        ) -> list[tuple[Node, bool, int]] | None:
            nonlocal bad_suffix
            if not rest:
                if node.handler(query) is not None:
                    return chain
                for child in node.children:
                    if child.optional:
                        found = search(child, rest, [*chain, (child, False, 1)])
                        if found:
                            return found
                return None
            for child in node.children:
                assert child.mnemonic is not None
                suffix = child.mnemonic.match(rest[0])
                if suffix is not None and suffix < 0:
                    bad_suffix = True
                elif suffix is not None:
                    found = search(child, rest[1:], [*chain, (child, True, suffix)])
                    if found:
                        return found
            for child in node.children:
                if child.optional:
                    found = search(child, rest, [*chain, (child, False, 1)])
                    if found:
                        return found
            return None

        chain = search(start, tokens, [(start, False, 1)])
        if chain is None:
            raise ScpiError(-114 if bad_suffix else -113)
        leaf = chain[-1][0]
        handler = leaf.handler(query)
        assert handler is not None
        last_explicit = max(i for i, (_, explicit, _) in enumerate(chain) if explicit)
        suffixes = tuple(s for n, _, s in chain if n.mnemonic is not None and n.mnemonic.suffix_max)
        return Resolved(handler, suffixes, chain[last_explicit - 1][0])


# --------------------------------------------------------------------------- parameters


@dataclass(frozen=True)
class Param:
    """One parsed program data element."""

    kind: str  # "number", "word" (character data) or "string"
    text: str
    number: float = 0.0
    suffix: str = ""


def parse_param(text: str) -> Param:
    """Classify one parameter; malformed data raises the matching -100 family error."""
    if text[0] in "\"'":
        quote = text[0]
        body, i = [], 1
        while i < len(text):
            c = text[i]
            if c == quote:
                if i + 1 < len(text) and text[i + 1] == quote:
                    body.append(quote)
                    i += 2
                    continue
                if i + 1 != len(text):
                    raise ScpiError(-151, "text after the closing quote")
                return Param("string", "".join(body))
            body.append(c)
            i += 1
        raise ScpiError(-151, "unterminated string")
    if text[0] in "+-.0123456789":
        m = _NUMBER.fullmatch(text)
        if m is None:
            head = _NUMBER.match(text)
            if head is not None and text[head.end(1) :][:1].isspace():
                raise ScpiError(-103, "expected a comma between parameters")
            raise ScpiError(-120)
        value = float(m.group(1))
        if not math.isfinite(value):
            raise ScpiError(-123)
        return Param("number", text, value, m.group(2).upper())
    if text[0].isalpha():
        if _CHAR_DATA.fullmatch(text) is None:
            raise ScpiError(-141)
        if len(text) > MAX_MNEMONIC:
            raise ScpiError(-144)
        return Param("word", text.upper())
    raise ScpiError(-101)


def suffix_multiplier(suffix: str, unit: str) -> float:
    """Multiplier of a suffix such as ``MV`` for unit ``V``; -131 if it is not a suffix of unit."""
    if suffix == unit:
        return 1.0
    if suffix.endswith(unit):
        prefix = suffix[: -len(unit)]
        if prefix == "M" and unit in _MEGA_UNITS:
            return 1e6
        if prefix in _MULTIPLIERS:
            return _MULTIPLIERS[prefix]
    raise ScpiError(-131, f"expected a suffix of unit {unit}")


def _word_matches(word: str, mnemonic: str) -> bool:
    m = Mnemonic.parse(mnemonic)
    return word in (m.long, m.short)


#: The special numeric words of SCPI-1999 Vol. 1 §7.2.1.
NUMERIC_WORDS = ("MINimum", "MAXimum", "DEFault")


@dataclass(frozen=True)
class Call:
    """One program message unit handed to a handler, with helpers that raise standard errors."""

    header: str
    query: bool
    params: tuple[Param, ...]
    suffixes: tuple[int, ...] = ()

    def count(self, minimum: int, maximum: int) -> None:
        """-109 for too few parameters, -108 for too many."""
        if len(self.params) < minimum:
            raise ScpiError(-109)
        if len(self.params) > maximum:
            raise ScpiError(-108)

    def has(self, index: int) -> bool:
        return index < len(self.params)

    def param(self, index: int) -> Param:
        """Parameter ``index``; -109 Missing parameter if the line has fewer."""
        if index >= len(self.params):
            raise ScpiError(-109)
        return self.params[index]

    def value(
        self,
        index: int,
        *,
        unit: str | None = None,
        words: Sequence[str] = NUMERIC_WORDS,
        low: float | None = None,
        high: float | None = None,
    ) -> float | str:
        """A number (suffix applied, range checked: -222) or one of ``words`` as its long form."""
        p = self.param(index)
        if p.kind == "word":
            for word in words:
                if _word_matches(p.text, word):
                    return word.upper()
            raise ScpiError(-224, f"expected a number or one of {', '.join(words)}")
        if p.kind != "number":
            raise ScpiError(-104, "expected a number")
        value = p.number
        if p.suffix:
            if unit is None:
                raise ScpiError(-138)
            value *= suffix_multiplier(p.suffix, unit)
        if (low is not None and value < low) or (high is not None and value > high):
            lo = "-inf" if low is None else f"{low:g}"
            hi = "+inf" if high is None else f"{high:g}"
            raise ScpiError(-222, f"expected {lo} to {hi}{' ' + unit if unit else ''}")
        return value

    def number(
        self,
        index: int,
        *,
        unit: str | None = None,
        low: float,
        high: float,
        default: float | None = None,
    ) -> float:
        """A number where MIN and MAX mean ``low`` and ``high``, and DEF ``default`` if given."""
        words = NUMERIC_WORDS if default is not None else ("MINimum", "MAXimum")
        v = self.value(index, unit=unit, words=words, low=low, high=high)
        if v == "MINIMUM":
            return low
        if v == "MAXIMUM":
            return high
        if v == "DEFAULT":
            assert default is not None
            return default
        assert isinstance(v, float)
        return v

    def integer(self, index: int, *, low: int, high: int) -> int:
        """A whole number; decimals are rounded as IEEE 488.2-1992 §7.7.2.2 allows."""
        return round(self.number(index, low=low, high=high))

    def boolean(self, index: int) -> bool:
        """ON/OFF or a number (non-zero after rounding means ON), SCPI-1999 Vol. 1 §7.3."""
        p = self.param(index)
        if p.kind == "number" and not p.suffix:
            return round(p.number) != 0
        if p.kind == "word" and p.text in ("ON", "OFF"):
            return p.text == "ON"
        if p.kind == "string":
            raise ScpiError(-104, "expected ON or OFF")
        raise ScpiError(-224, "expected ON or OFF")

    def word(self, index: int, choices: Sequence[str]) -> str:
        """One of ``choices`` (mnemonics with short forms), returned as the long form."""
        p = self.param(index)
        if p.kind != "word":
            raise ScpiError(-104, f"expected one of {', '.join(choices)}")
        for choice in choices:
            if _word_matches(p.text, choice):
                return choice.upper()
        raise ScpiError(-224, f"expected one of {', '.join(choices)}")

    def string(self, index: int) -> str:
        p = self.param(index)
        if p.kind != "string":
            raise ScpiError(-104, "expected a quoted string")
        return p.text


# --------------------------------------------------------------------------- line splitting


def _split_outside_quotes(text: str, sep: str) -> list[str]:
    parts: list[str] = []
    current: list[str] = []
    quote = ""
    for c in text:
        if quote:
            current.append(c)
            if c == quote:
                quote = ""
        elif c in "\"'":
            quote = c
            current.append(c)
        elif c == sep:
            parts.append("".join(current))
            current = []
        else:
            current.append(c)
    parts.append("".join(current))
    return parts


def line_has_query(line: str) -> bool:
    """Whether a line asks for a reply (a ``?`` outside quoted strings)."""
    return any(
        "?" in unit.split(None, 1)[0] for unit in _split_outside_quotes(line, ";") if unit.strip()
    )


def _header_error(header: str) -> ScpiError:
    if _HEADER_CHARS.fullmatch(header) is None:
        return ScpiError(-103 if ("," in header or ";" in header) else -101)
    for token in header.lstrip("*:").rstrip("?").split(":"):
        if len(token) > MAX_MNEMONIC:
            return ScpiError(-112)
    return ScpiError(-102)


# --------------------------------------------------------------------------- status and errors


class ErrorQueue:
    """FIFO of errors; on overflow the last entry becomes -350 (SCPI-1999 Vol. 2 §21.8)."""

    def __init__(self, depth: int = ERROR_QUEUE_DEPTH) -> None:
        self.depth = depth
        self._entries: deque[ScpiError] = deque()

    def push(self, error: ScpiError) -> None:
        if len(self._entries) < self.depth:
            self._entries.append(error)
        elif self._entries[-1].code != -350:
            self._entries[-1] = ScpiError(-350)

    def pop(self) -> ScpiError:
        return self._entries.popleft() if self._entries else ScpiError(0)

    def clear(self) -> None:
        self._entries.clear()

    def __len__(self) -> int:
        return len(self._entries)


@dataclass
class StatusRegisters:
    """IEEE 488.2-1992 §11: event status register and its enable, service request enable."""

    esr: int = 0x80  # bit 7: power on
    ese: int = 0
    sre: int = 0


# --------------------------------------------------------------------------- the instrument core


class ScpiInstrument:
    """Base of a simulated SCPI instrument: parses lines, runs handlers, keeps status and faults.

    Subclasses register their commands on ``self.tree`` and implement ``reset_device``.
    """

    #: Fault kinds every SCPI simulator knows; subclasses may add their own.
    FAULT_KINDS: ClassVar[tuple[str, ...]] = ("drop", "silent", "garble", "config_error")

    def __init__(self, identity: InstrumentIdentity) -> None:
        self.identity = identity
        #: Held by the server around each line so two clients never interleave.
        self.lock = threading.RLock()
        self.tree = CommandTree()
        self.errors = ErrorQueue()
        self.status = StatusRegisters()
        self._faults: dict[str, int | None] = {}
        self._lines_handled = 0
        self._lines_answered = 0
        self._replies: list[str] = []
        self._common: dict[tuple[str, bool], Handler] = {
            ("*IDN", True): self._idn,
            ("*RST", False): self._rst,
            ("*CLS", False): self._cls,
            ("*OPC", False): self._opc,
            ("*OPC", True): lambda c: self._no_params(c, "1"),
            ("*WAI", False): lambda c: self._no_params(c, None),
            ("*TST", True): lambda c: self._no_params(c, "0"),
            ("*ESR", True): self._esr_query,
            ("*ESE", False): self._ese_set,
            ("*ESE", True): lambda c: self._no_params(c, str(self.status.ese)),
            ("*SRE", False): self._sre_set,
            ("*SRE", True): lambda c: self._no_params(c, str(self.status.sre)),
            ("*STB", True): lambda c: self._no_params(c, str(self.status_byte())),
        }
        self.tree.add("SYSTem:ERRor[:NEXT]?", on_query=self._error_next)
        self.tree.add(
            "SYSTem:ERRor:COUNt?", on_query=lambda c: self._no_params(c, str(len(self.errors)))
        )
        self.tree.add("SYSTem:VERSion?", on_query=lambda c: self._no_params(c, "1999.0"))

    # ----------------------------------------------------------------- what subclasses provide

    def reset_device(self) -> None:
        """The device part of ``*RST`` (settings to defaults); queues and status stay."""

    # ----------------------------------------------------------------- the line interface

    @property
    def lines_handled(self) -> int:
        """How many lines this instrument has been sent (lets tests see what a driver skipped)."""
        return self._lines_handled

    @property
    def lines_answered(self) -> int:
        """How many of those lines had a reply: the round trips a driver waited for."""
        return self._lines_answered

    def handle(self, line: str) -> str | None:
        """Execute one line; the reply (units joined by ``;``) or None if nothing was asked."""
        with self.lock:
            self._lines_handled += 1
            self._replies = []
            self._execute_line(line)
            replies, self._replies = self._replies, []
            if not replies:
                return None
            self._lines_answered += 1
            reply = ";".join(replies)
            if self._take_fault("garble"):
                reply = self._garble(reply)
            return reply

    def push_error(self, code: int, detail: str = "") -> None:
        """Queue an error and set its ESR bit."""
        with self.lock:
            error = ScpiError(code, detail)
            self.errors.push(error)
            bit = esr_bit(code)
            if bit is not None:
                self.status.esr |= 1 << bit
            log.debug("%s queued %s", self.identity.model, error.formatted())

    def unterminated(self, fragment: str) -> None:
        """The link closed inside ``fragment``: a query there is -420 (IEEE 488.2 §6.3.2.2)."""
        if fragment.strip() and line_has_query(fragment):
            self.push_error(-420)

    def overrun(self) -> None:
        """A line too long for the input buffer was discarded."""
        self.push_error(-363)

    def status_byte(self) -> int:
        """STB: bit 2 error queue, 4 message available, 5 event summary, 6 master summary."""
        with self.lock:
            stb = 0
            if len(self.errors):
                stb |= 1 << 2
            if self._replies:
                stb |= 1 << 4
            if self.status.esr & self.status.ese:
                stb |= 1 << 5
            if stb & self.status.sre & ~0x40:
                stb |= 1 << 6
            return stb

    # ----------------------------------------------------------------- faults

    def inject_fault(self, kind: str, count: int | None = 1) -> None:
        """Arm a fault for the next ``count`` occasions (None: until ``clear_faults``)."""
        if kind not in self.FAULT_KINDS:
            raise ValueError(
                f"unknown fault kind {kind!r}; known kinds: {', '.join(self.FAULT_KINDS)}"
            )
        if count is not None and (
            isinstance(count, bool) or not isinstance(count, int) or count < 1
        ):
            raise ValueError(f"fault count must be a positive integer or None, got {count!r}")
        with self.lock:
            self._faults[kind] = count
            self._fault_armed(kind)

    def clear_faults(self) -> None:
        with self.lock:
            self._faults.clear()

    def transport_fault(self, line: str) -> str | None:
        """Asked by the server per line: ``"drop"`` or ``"silent"`` if armed and it is a query."""
        with self.lock:
            if not line_has_query(line):
                return None
            for kind in ("drop", "silent"):
                if self._take_fault(kind):
                    return kind
            return None

    def _fault_armed(self, kind: str) -> None:
        """Hook for faults that act at once (the supply's trip)."""

    def _take_fault(self, kind: str) -> bool:
        if kind not in self._faults:
            return False
        left = self._faults[kind]
        if left is not None:
            if left <= 1:
                del self._faults[kind]
            else:
                self._faults[kind] = left - 1
        return True

    def _garble(self, reply: str) -> str:
        """Corrupt a reply the way line noise would: high bytes, no terminator inside."""
        return "".join(chr(0x80 | (ord(c) * 7 + i) % 0x7F) for i, c in enumerate(reply)) or "\x9b"

    # ----------------------------------------------------------------- parsing

    def _execute_line(self, line: str) -> None:
        units = _split_outside_quotes(line, ";")
        if len(units) > 1 and not units[-1].strip():
            units.pop()  # a trailing ';' ends the message
        if len(units) == 1 and not units[0].strip():
            return
        start = self.tree.root
        for unit in units:
            try:
                start = self._execute_unit(unit, start)
            except ScpiError as error:
                # IEEE 488.2 leaves the recovery point to the device: we skip the rest of the line.
                self.push_error(error.code, error.detail)
                return
            except Exception as error:
                log.exception("handler failed on %r", unit)
                self.push_error(-300, f"internal: {type(error).__name__}")
                return

    def _execute_unit(self, unit: str, start: Node) -> Node:
        text = unit.strip()
        if not text:
            raise ScpiError(-102, "empty message unit")
        header, rest = [*text.split(None, 1), ""][:2]
        query = header.endswith("?")
        params = self._parse_params(rest.strip())
        if header.startswith("*"):
            if _COMMON_HEADER.fullmatch(header) is None:
                raise _header_error(header)
            handler = self._common.get((header.rstrip("?").upper(), query))
            if handler is None:
                raise ScpiError(-113)
            self._run(handler, Call(header, query, params))
            return start  # common commands do not move the path (IEEE 488.2-1992 §7.6.1.1)
        if _HEADER.fullmatch(header) is None:
            raise _header_error(header)
        tokens = header.rstrip("?").split(":")
        if header.startswith(":"):
            start, tokens = self.tree.root, tokens[1:]
        for token in tokens:
            if len(token) > MAX_MNEMONIC:
                raise ScpiError(-112)
        resolved = self.tree.resolve(start, tokens, query)
        self._run(resolved.handler, Call(header, query, params, resolved.suffixes))
        return resolved.next_start

    def _parse_params(self, text: str) -> tuple[Param, ...]:
        if not text:
            return ()
        parts = [p.strip() for p in _split_outside_quotes(text, ",")]
        if any(not p for p in parts):
            raise ScpiError(-102, "empty parameter")
        return tuple(parse_param(p) for p in parts)

    def _run(self, handler: Handler, call: Call) -> None:
        reply = handler(call)
        if call.query:
            if reply is None:
                raise ScpiError(-300, "query produced no reply")
            self._replies.append(reply)

    # ----------------------------------------------------------------- common commands

    def _no_params(self, call: Call, reply: str | None) -> str | None:
        call.count(0, 0)
        return reply

    def _idn(self, call: Call) -> str:
        call.count(0, 0)
        i = self.identity
        return f"{i.manufacturer},{i.model},{i.serial},{i.firmware}"

    def _rst(self, call: Call) -> None:
        call.count(0, 0)
        self.reset_device()

    def _cls(self, call: Call) -> None:
        call.count(0, 0)
        self.errors.clear()
        self.status.esr = 0

    def _opc(self, call: Call) -> None:
        call.count(0, 0)
        self.status.esr |= 1  # every operation here completes before the next line is read

    def _esr_query(self, call: Call) -> str:
        call.count(0, 0)
        value, self.status.esr = self.status.esr, 0
        return str(value)

    def _ese_set(self, call: Call) -> None:
        call.count(1, 1)
        self.status.ese = call.integer(0, low=0, high=255)

    def _sre_set(self, call: Call) -> None:
        call.count(1, 1)
        self.status.sre = call.integer(0, low=0, high=255) & ~0x40  # bit 6 cannot be enabled

    def _error_next(self, call: Call) -> str:
        call.count(0, 0)
        return self.errors.pop().formatted()


def format_reading(value: float) -> str:
    """A reading as bench meters send it: ``+1.23456789E+00``."""
    return f"{value:+.8E}"
