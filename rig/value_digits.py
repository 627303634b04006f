"""A reported value shown to the digits its uncertainty supports.

JCGM 100:2008 (GUM) 7.2.6: the numerical values of an estimate and its uncertainty should not be
given with an excessive number of digits; it usually suffices to quote the uncertainty to at most
two significant digits, and the estimate is rounded to the same decimal place.  GUM 7.2.6 also
allows rounding the uncertainty up rather than to the nearest digit; a report rounds it up, so
that the U shown is never smaller than the U the verdict was judged with.  Display only: the
verdicts come from the unrounded values, and the CSV and JSON records keep full precision.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from dataclasses import dataclass
from decimal import ROUND_CEILING, ROUND_HALF_EVEN, Decimal

_SIGNIFICANT = 2


def _decimals(u: float) -> int:
    """The decimal place (digits after the point; negative: tens, hundreds ...) of the last of
    two significant digits of ``u`` rounded up, where a carry (0.0996 -> 0.10) can move it."""
    place = _SIGNIFICANT - 1 - math.floor(math.log10(u))
    rounded = _rounded(u, place, ROUND_CEILING)
    if rounded >= Decimal(10) ** (_SIGNIFICANT - place):  # 0.0996 -> 0.100: one digit fewer
        place -= 1
    return place


def _rounded(x: float, place: int, how: str) -> Decimal:
    """``x`` rounded to ``place`` decimals, from its shortest decimal text (``repr``): 0.095 is
    rounded up as 0.095, not as the double just above it (0.0950000000000000011)."""
    return Decimal(repr(x)).quantize(Decimal(1).scaleb(-place), rounding=how)


def _text(x: Decimal, place: int, shift: int = 0) -> str:
    """``x`` in units of ``10 ** shift`` (3: a kilo prefix), moved by its decimal exponent so no
    binary division can round it again; tens or coarser (a negative place): a whole number, the
    digits below it zero."""
    return f"{x.scaleb(-shift):.{max(place + shift, 0)}f}"


MORE_PLACES = 8
"""The most decimal places added past U's to tell a value from a limit it is not equal to."""


def shown_place(value: float, u: float, limits: Iterable[float | None] = ()) -> int | None:
    """The decimal place ``value`` (and limits beside it) are shown to: that of ``u`` to two
    significant digits (GUM 7.2.6), or a finer one where the value would read as a limit it is
    not equal to (rounding to nearest is monotone, so once the two differ the value shown lies
    on its own side of the limit).  None where ``u`` is not a positive finite number."""
    if not (math.isfinite(u) and u > 0.0 and math.isfinite(value)):
        return None
    place = _decimals(u)
    near = [x for x in limits if x is not None and math.isfinite(x) and x != value]
    for _ in range(MORE_PLACES):
        shown = _rounded(value, place, ROUND_HALF_EVEN)
        if all(shown != _rounded(x, place, ROUND_HALF_EVEN) for x in near):
            break
        place += 1
    return place


def at_place(x: float, place: int, shift: int = 0) -> str:
    """``x`` rounded to nearest at ``place`` decimals (tens or coarser: a whole number), written
    in units of ``10 ** shift`` (``at_place(2162.62, 0, 3)`` -> ``"2.163"``, in kilo)."""
    return _text(_rounded(x, place, ROUND_HALF_EVEN), place, shift)


STATED_DIGITS = 6
"""A limit with this many significant digits or fewer reads as a figure someone stated (4.125 V,
a sequence's own limit); a computed one (a model's prediction, a copper limit) has a double's
fifteen or so."""


def limit_at_place(x: float, place: int, shift: int = 0) -> str:
    """A limit beside a value shown to ``place`` decimals.  A stated figure (``STATED_DIGITS``)
    is shown as stated, without the trailing zeros a reading would have (``4.8`` beside
    ``2.32741``, ``4.125`` beside ``2.33``): it is a specification, not a measurement, and GUM
    7.2.6's rounding is for the result.  A computed limit is rounded to nearest at the value's
    place (``2.270`` kohm beside ``2.163``, ``0.0574`` beside ``0.0454``)."""
    exact = Decimal(repr(x))
    if len(exact.normalize().as_tuple().digits) <= STATED_DIGITS:
        shown = max(place, -exact.normalize().as_tuple().exponent)  # type: ignore[operator]
        text = _text(exact.quantize(Decimal(1).scaleb(-shown)), shown, shift)
        return text.rstrip("0").rstrip(".") if "." in text else text
    return at_place(x, place, shift)


def value_and_u(
    value: float, u: float, limits: Iterable[float | None] = (), shift: int = 0
) -> tuple[str, str]:
    """``value`` and its expanded uncertainty ``u`` as the report shows them: ``u`` to two
    significant digits (rounded up), ``value`` to the same decimal place (rounded to nearest),
    or finer where it would read as one of ``limits`` (``shown_place``);
    (22.993455896585182, 0.2346872766) -> ("22.99", "0.24").  Where ``u`` is not a positive
    finite number, nothing can be said of the digits: ``value`` keeps seven significant ones.
    Both are written in units of ``10 ** shift`` (3: the kilo of a value shown in kohm), the
    digits chosen in the unshifted unit, so a prefix never changes what is shown."""
    place = shown_place(value, u, limits)
    if place is None:
        scale = 10.0**shift
        return f"{value / scale:.7g}", (f"{u / scale:.3g}" if math.isfinite(u) else "")
    return at_place(value, place, shift), u_text(u, shift)


def u_text(u: float, shift: int = 0) -> str:
    """A positive finite expanded uncertainty to two significant digits, rounded up (never
    smaller than the U judged with), in units of ``10 ** shift``: 0.2346872766 -> "0.24"."""
    place = _decimals(u)
    return _text(_rounded(u, place, ROUND_CEILING), place, shift)


@dataclass(frozen=True)
class ShownDigits:
    """A reading, its limits (None: that side open) and its U, each as text in one prefix."""

    value: str
    low: str | None
    high: str | None
    u: str


def digits_shown(
    value: float, u: float, low: float | None, high: float | None, shift: int = 0
) -> ShownDigits | None:
    """A reading beside its limits and U, to the digits U supports, in units of ``10 ** shift``:
    what ``rig run``'s table and the console show (the value ``shown_place``, a limit
    ``limit_at_place``, U ``u_text``).  None where the value or a limit is not a finite number,
    or U is not a positive finite one: nothing can be said of the digits."""
    bounds = [b for b in (low, high) if b is not None]
    if not math.isfinite(value) or not all(math.isfinite(b) for b in bounds):
        return None
    place = shown_place(value, u, bounds)
    if place is None:
        return None

    def limit(b: float | None) -> str | None:
        return None if b is None else limit_at_place(b, place, shift)

    return ShownDigits(at_place(value, place, shift), limit(low), limit(high), u_text(u, shift))
