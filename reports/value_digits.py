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


def _text(x: Decimal, place: int) -> str:
    return f"{x:.{max(place, 0)}f}"


def value_and_u(value: float, u: float) -> tuple[str, str]:
    """``value`` and its expanded uncertainty ``u`` as the report shows them: ``u`` to two
    significant digits (rounded up), ``value`` to the same decimal place (rounded to nearest);
    (22.993455896585182, 0.2346872766) -> ("22.99", "0.24").  Where ``u`` is not a positive
    finite number, nothing can be said of the digits: ``value`` keeps seven significant ones."""
    if not (math.isfinite(u) and u > 0.0):
        return f"{value:.7g}", (f"{u:.3g}" if math.isfinite(u) else "")
    place = _decimals(u)
    shown_u = _rounded(u, place, ROUND_CEILING)
    shown_value = _rounded(value, place, ROUND_HALF_EVEN)
    if place < 0:  # tens or coarser: whole numbers, the digits below them zero
        return _text(shown_value, 0), _text(shown_u, 0)
    return _text(shown_value, place), _text(shown_u, place)
