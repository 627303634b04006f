"""Values with units, as they are written in rig's data files ("2.2 kohm", "0.02 V", "150 ms").

Files carry units so that a reader never has to guess whether 2.2 means ohms or kilohms.  A bare
number is accepted only where the key itself names the unit (``length_m = 1.5``).
"""

from __future__ import annotations

import math
import re

_PREFIX = {
    "p": 1e-12,
    "n": 1e-9,
    "u": 1e-6,
    "µ": 1e-6,
    "μ": 1e-6,
    "m": 1e-3,
    "": 1.0,
    "k": 1e3,
    "M": 1e6,
    "G": 1e9,
}

# unit symbol as written -> canonical SI unit name used in code
_UNITS = {
    "V": "V",
    "A": "A",
    "ohm": "ohm",
    "Ohm": "ohm",
    "Ω": "ohm",
    "s": "s",
    "Hz": "Hz",
    "F": "F",
    "K": "K",
    "degC": "degC",
    "°C": "degC",
    "C": "degC",
    "%": "%",
    "m": "m",
    "mm2": "mm2",
    "mm²": "mm2",
    "Pa": "Pa",
    "bar": "bar",
}

_PATTERN = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(\S*)\s*$")


class QuantityError(ValueError):
    """A value could not be read as a quantity of the expected unit."""

    def __init__(self, message: str, *, reason: str = "") -> None:
        super().__init__(message)
        self.reason = reason or message
        """What is wrong with the value, without what was expected: for a caller that says what
        it expects in its own words (a command-line option)."""


def _split_unit(text: str) -> tuple[float, str]:
    """Split a symbol into (prefix factor, canonical unit); the longest known unit wins."""
    if text in _UNITS:
        return 1.0, _UNITS[text]
    for unit in sorted(_UNITS, key=len, reverse=True):
        if text.endswith(unit):
            prefix = text[: -len(unit)]
            if prefix in _PREFIX and _UNITS[unit] not in _NOT_PREFIXED:
                return _PREFIX[prefix], _UNITS[unit]
    raise QuantityError(f"unknown unit {text!r}")  # its own reason: nothing expected in it


_NOT_PREFIXED = ("%", "degC", "K", "mm2")
_PREFIX_NAMES = {"p": "pico", "n": "nano", "u": "micro", "m": "milli", "k": "kilo", "M": "mega"}
_PREFIX_NAMES |= {"G": "giga"}


def _meant_units(text: str, unit: str) -> list[str]:
    """The spellings in ``unit`` that ``text`` is a slip of letter case of ("mv" -> "mV",
    "KOhm" -> "kohm"), as the SI Brochure (BIPM, 9th edition, 2019, tables 3 and 7) writes the
    prefixes and symbols.  A prefix valid as typed is kept ("mv" is "mV", not "MV"), except in
    text typed all in capitals, where its case says nothing ("MOHM": "Mohm" or "mohm")."""
    found: list[str] = []
    for symbol, name in _UNITS.items():
        if name == "bar" and unit == "Pa":
            name = "Pa" if symbol == "bar" else name
        if name != unit or not text.lower().endswith(symbol.lower()):
            continue
        typed = text[: len(text) - len(symbol)]
        if typed and _UNITS[symbol] in _NOT_PREFIXED:
            continue
        if typed in _PREFIX and not (text.isupper() and typed.isalpha()):
            prefixes = [typed]
        else:
            same = [p for p in _PREFIX if p.lower() == typed.lower() and p.isascii()]
            prefixes = sorted(same, key=lambda p: p != typed)  # the case as typed first
        spelt = "ohm" if _UNITS[symbol] == "ohm" else symbol
        found += [p + spelt for p in prefixes if p + spelt != text and p + spelt not in found]
    return found


def _hint(text: str, unit: str) -> str:
    """``; did you mean ...?`` for a unit typed in the wrong letter case; empty otherwise."""
    meant = _meant_units(text, unit)
    if len(meant) == 1:
        return f"; did you mean {meant[0]!r}?"
    if meant:
        named = " or ".join(f"{m!r} ({_PREFIX_NAMES.get(m[0], '')})" for m in meant)
        return f"; did you mean {named}? Prefixes are case-sensitive"
    return ""


_MINUTES = ("min", "mins", "minute", "minutes", "m")
_HOURS = ("h", "hr", "hrs", "hour", "hours")


def _in_seconds(number: float, symbol: str, unit: str) -> str:
    """Where a time is expected in minutes or hours, the same time in seconds, the only unit of
    time rig reads (``"30 min"`` -> ``; write '1800 s'``); empty otherwise."""
    if unit != "s" or symbol not in (*_MINUTES, *_HOURS):
        return ""
    seconds = number * (60.0 if symbol in _MINUTES else 3600.0)
    return f"; times are in seconds: write '{seconds:g} s'"


def parse_quantity(value: object, unit: str) -> float:
    """Read ``value`` ("2.2 kohm", "500 mV", "1.5e3 ohm") as a float in the SI unit ``unit``.

    ``unit`` is the canonical name ("ohm", "V", "A", "s", "Hz", "F", "degC", "%", "m", "Pa").
    Pressure also accepts bar (1 bar = 100 kPa).  Raises ``QuantityError`` saying what was expected.
    """
    if isinstance(value, bool) or not isinstance(value, str):
        raise QuantityError(f"expected a string with a unit such as '1.5 {unit}', found {value!r}")
    match = _PATTERN.match(value)
    if not match:
        raise QuantityError(
            f"expected a number and a unit such as '1.5 {unit}', found {value!r}",
            reason=f"{value!r} is not a number with a unit",
        )
    number = float(match.group(1))
    symbol = match.group(2)
    if not symbol:
        raise QuantityError(
            f"{value!r} has no unit; expected a value in {unit}", reason=f"{value!r} has no unit"
        )
    try:
        factor, found = _split_unit(symbol)
    except QuantityError as exc:
        hint = _in_seconds(number, symbol, unit) or _hint(symbol, unit)
        raise QuantityError(f"{exc}{hint}") from None
    if found == "bar" and unit == "Pa":
        factor, found = factor * 1e5, "Pa"
    if found != unit:
        raise QuantityError(
            f"expected a value in {unit}, found {value!r} (a value in {found})"
            f"{_in_seconds(number, symbol, unit)}",
            reason=f"{value!r} is a value in {found}{_in_seconds(number, symbol, unit)}",
        )
    result = number * factor
    if not math.isfinite(result):
        raise QuantityError(f"{value!r} is not a finite number")
    return result


def format_quantity(value: float, unit: str, digits: int = 4) -> str:
    """Show ``value`` with an engineering prefix: 2200.0, "ohm" -> "2.2 kohm"."""
    if not math.isfinite(value):
        return "overload" if math.isinf(value) else "no reading"
    exponent, symbol = prefixed_unit(value, unit)
    return f"{value / 10**exponent:.{digits}g} {symbol}"


def prefixed_unit(size: float, unit: str) -> tuple[int, str]:
    """The engineering prefix a number of magnitude ``size`` is written with, as its power of
    ten and the unit's symbol: (2200.0, "ohm") -> (3, "kohm"); none for %, degC and K, or for a
    size of zero or not finite.  Numbers shown side by side share the prefix of the largest."""
    if unit in ("%", "degC", "K") or size == 0 or not math.isfinite(size):
        return 0, {"degC": "°C"}.get(unit, unit)
    exponent = int(math.floor(math.log10(abs(size)) / 3) * 3)
    exponent = max(-12, min(9, exponent))
    return exponent, _PREFIX_OF[exponent] + unit


_PREFIX_OF = {-12: "p", -9: "n", -6: "u", -3: "m", 0: "", 3: "k", 6: "M", 9: "G"}
