"""A file's values handed to a model: what the model refuses is a problem of the file.

The models check their arguments and raise ``ModelInputError`` (``rig/models/_common.py``).  A
sequence step or a unit file's sensor builds its model from the file while the file is loaded or
planned; there, such an error is bad input like any other, so it becomes a problem naming the
file, line and key, and ``rig check`` exits 2 with the others, never 3 (which tells scripts the
bench failed).  The readers here are those the sequence and the unit file share.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TypeVar

from rig.config.reader import Section
from rig.models import ModelInputError
from rig.models.ntc import KELVIN_OFFSET, SteinhartHart
from rig.models.ratiometric import Ratiometric

T = TypeVar("T")


def refused(exc: ModelInputError) -> str:
    """The words of a problem for values a model refused."""
    return f"the values are outside what the model takes: {exc}"


def built(sec: Section, key: str, make: Callable[[], T]) -> T | None:
    """``make()``, or None with a problem at ``key`` where the model refuses the values."""
    try:
        return make()
    except ModelInputError as exc:
        sec.problem(key, refused(exc))
        return None


def above_absolute_zero(sec: Section, key: str, value: float | None) -> float | None:
    """A stated temperature, or None with a problem at or below absolute zero (-273.15 degC,
    the kelvin's definition in the SI): every model of a part refuses it."""
    if value is not None and value <= -KELVIN_OFFSET:
        sec.problem(
            key,
            f"expected a temperature above absolute zero (-{KELVIN_OFFSET:g} degC), "
            f"found {sec.raw(key)!r}",
        )
        return None
    return value


def read_steinhart_hart(sec: Section) -> SteinhartHart | None:
    """``steinhart_hart = [A, B, C]``: None, with a problem, where it is there but unusable."""
    coeffs = sec.raw("steinhart_hart")
    if coeffs is None:
        return None
    numbers = isinstance(coeffs, list) and len(coeffs) == 3
    if numbers and all(isinstance(c, int | float) and not isinstance(c, bool) for c in coeffs):
        a, b, c = (float(c) for c in coeffs)
        return built(sec, "steinhart_hart", lambda: SteinhartHart(a, b, c))
    sec.problem("steinhart_hart", f"expected three numbers [A, B, C], found {coeffs!r}")
    return None


def read_ratiometric(sec: Section) -> Ratiometric | None:
    """A ratiometric transfer: ``fraction_low`` of supply at ``range_low`` to ``fraction_high``
    at ``range_high`` (default 10 % to 90 %); None with the problems where it is unusable."""
    low = sec.quantity("range_low", "Pa")
    high = sec.quantity("range_high", "Pa")
    frac_low = _fraction(sec, "fraction_low", 0.1)
    frac_high = _fraction(sec, "fraction_high", 0.9)
    if low is None or high is None or frac_low is None or frac_high is None:
        return None
    if low == high:
        sec.problem(
            "range_high",
            f"expected a pressure other than range_low ({sec.raw('range_low')!r}): "
            "the sensor's span cannot be empty",
        )
        return None
    if frac_low == frac_high:
        sec.problem(
            "fraction_high",
            f"expected a fraction other than fraction_low ({frac_low:g}): "
            "the output must change across the span",
        )
        return None
    return built(sec, "range_high", lambda: Ratiometric(low, high, frac_low, frac_high))


def _fraction(sec: Section, key: str, default: float) -> float | None:
    """A fraction of the supply, 0 to 1 (0.1 is 10 %)."""
    value = sec.number(key, default)
    if value is not None and not 0.0 <= value <= 1.0:
        sec.problem(key, f"expected a fraction from 0 to 1 (0.1 is 10 % of supply), found {value}")
        return None
    return value
