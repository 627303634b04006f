"""A meter's accuracy as its data sheet states it, turned into standard uncertainty.

A specification +-(p % of reading + q % of range) bounds the error without saying more, so it is
taken as a rectangular distribution of half-width a: u = a / sqrt(3) (JCGM 100:2008, GUM, 4.3.7).
A display resolution delta contributes u = delta / sqrt(12) the same way.
"""

from __future__ import annotations

import enum
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

from rig.models._common import ModelInputError, require_finite

FUNCTIONS = ("dcv", "res2w", "res4w", "dci")
"""Meter functions a table may list; the same names as ``drivers.base.MeterFunction`` values."""

SQRT3 = math.sqrt(3.0)
SQRT12 = math.sqrt(12.0)


@dataclass(frozen=True)
class AccuracySpec:
    """+-(pct_reading % of reading + pct_range % of range) for one range of one function."""

    pct_reading: float
    pct_range: float

    def __post_init__(self) -> None:
        for name in ("pct_reading", "pct_range"):
            value = require_finite(getattr(self, name), name)
            if value < 0.0:
                raise ModelInputError(f"{name} = {value!r} %: expected 0 or above")

    @classmethod
    def from_ppm(cls, ppm_reading: float, ppm_range: float) -> AccuracySpec:
        """The same spec written in parts per million, as many data sheets give it."""
        return cls(
            pct_reading=require_finite(ppm_reading, "ppm_reading") / 1e4,
            pct_range=require_finite(ppm_range, "ppm_range") / 1e4,
        )

    def half_width(self, reading: float, range_: float) -> float:
        """Half-width a of the error bound, in the reading's unit."""
        reading = require_finite(reading, "reading")
        range_ = require_finite(range_, "range_")
        if range_ <= 0.0:
            raise ModelInputError(f"range_ = {range_!r}: expected a range above 0")
        return (self.pct_reading * abs(reading) + self.pct_range * range_) / 100.0

    def standard_uncertainty(self, reading: float, range_: float) -> float:
        """u = a / sqrt(3): the bound read as a rectangular distribution (GUM 4.3.7)."""
        return self.half_width(reading, range_) / SQRT3


def rectangular_u(half_width: float) -> float:
    """Standard uncertainty of a rectangular distribution of half-width a: a / sqrt(3)."""
    a = require_finite(half_width, "half_width")
    if a < 0.0:
        raise ModelInputError(f"half_width = {a!r}: expected 0 or above")
    return a / SQRT3


def resolution_u(delta: float) -> float:
    """Standard uncertainty of a display resolution delta (one count): delta / sqrt(12)."""
    d = require_finite(delta, "delta")
    if d < 0.0:
        raise ModelInputError(f"delta = {d!r}: expected 0 or above")
    return d / SQRT12


def _function_name(function: str | enum.Enum) -> str:
    name = function.value if isinstance(function, enum.Enum) else function
    if name not in FUNCTIONS:
        raise ModelInputError(
            f"meter function {name!r} is not known: expected one of {', '.join(FUNCTIONS)}"
        )
    return str(name)


@dataclass(frozen=True)
class AccuracyTable:
    """Per meter function, its ranges (upper value) with the spec that applies on each.

    Accepts function names as text or as an enum whose value is the name (``MeterFunction``).
    """

    entries: Mapping[str, Sequence[tuple[float, AccuracySpec]]]
    _sorted: dict[str, list[tuple[float, AccuracySpec]]] = field(
        init=False, repr=False, compare=False
    )

    def __post_init__(self) -> None:
        table: dict[str, list[tuple[float, AccuracySpec]]] = {}
        for function, rows in self.entries.items():
            name = _function_name(function)
            if not rows:
                raise ModelInputError(f"meter function {name!r} lists no ranges")
            checked: list[tuple[float, AccuracySpec]] = []
            for row in rows:
                upper, spec = row
                upper = require_finite(upper, f"{name} range")
                if upper <= 0.0:
                    raise ModelInputError(f"{name} range {upper!r}: expected above 0")
                if not isinstance(spec, AccuracySpec):
                    raise ModelInputError(f"{name} range {upper!r}: expected an AccuracySpec")
                checked.append((upper, spec))
            checked.sort(key=lambda r: r[0])
            uppers = [u for u, _ in checked]
            if len(set(uppers)) != len(uppers):
                raise ModelInputError(f"meter function {name!r} lists a range twice: {uppers}")
            table[name] = checked
        object.__setattr__(self, "_sorted", table)

    def ranges(self, function: str | enum.Enum) -> list[float]:
        """The ranges listed for ``function``, smallest first."""
        return [u for u, _ in self._rows(function)]

    def _rows(self, function: str | enum.Enum) -> list[tuple[float, AccuracySpec]]:
        name = _function_name(function)
        if name not in self._sorted:
            raise ModelInputError(
                f"the accuracy table has no entry for {name!r}: it lists "
                f"{', '.join(self._sorted) or 'nothing'}"
            )
        return self._sorted[name]

    def spec_for(self, function: str | enum.Enum, range_: float) -> AccuracySpec:
        """The spec of the range in use; ``range_`` must be one the table lists."""
        rows = self._rows(function)
        for upper, spec in rows:
            if math.isclose(upper, range_, rel_tol=1e-9):
                return spec
        raise ModelInputError(
            f"range {range_!r} is not listed for {_function_name(function)!r}: "
            f"expected one of {[u for u, _ in rows]}"
        )

    def range_for(self, function: str | enum.Enum, value: float) -> float:
        """The smallest listed range that holds |value|: what autorange would settle on."""
        v = require_finite(value, "value")
        rows = self._rows(function)
        for upper, _ in rows:
            if abs(v) <= upper:
                return upper
        raise ModelInputError(
            f"{_function_name(function)} value {v!r} exceeds the largest range {rows[-1][0]!r}"
        )
