"""Process capability of a step's values against its limits (AIAG SPC manual definitions).

Cp = (USL - LSL) / 6s and Cpk = min(USL - mean, mean - LSL) / 3s, with s the sample standard
deviation.  With one limit only Cp is undefined and Cpk is the one-sided index.  Pure.
"""

from __future__ import annotations

import math
from dataclasses import dataclass


@dataclass(frozen=True)
class Capability:
    n: int
    mean: float
    std: float
    cp: float | None
    cpk: float | None


def capability_from_moments(
    n: int, mean: float, std: float, low: float | None, high: float | None
) -> Capability:
    """Cp and Cpk from a count, mean and sample standard deviation (None where undefined)."""
    if n < 2 or not math.isfinite(std) or std <= 0:
        return Capability(n, mean, std, None, None)
    cp = None if low is None or high is None else (high - low) / (6.0 * std)
    sides = [
        x
        for x in (
            (high - mean) if high is not None else None,
            (mean - low) if low is not None else None,
        )
        if x is not None
    ]
    cpk = min(sides) / (3.0 * std) if sides else None
    return Capability(n, mean, std, cp, cpk)


def capability(values: list[float], low: float | None, high: float | None) -> Capability:
    """Cp and Cpk of a list of values (NaN values are left out)."""
    xs = [v for v in values if math.isfinite(v)]
    n = len(xs)
    if n == 0:
        return Capability(0, math.nan, math.nan, None, None)
    mean = math.fsum(xs) / n
    std = math.sqrt(math.fsum((x - mean) ** 2 for x in xs) / (n - 1)) if n > 1 else math.nan
    return capability_from_moments(n, mean, std, low, high)


def moments_from_sums(n: int, sum_d: float, sum_d2: float, shift: float) -> tuple[float, float]:
    """Mean and sample standard deviation from sums of shifted values d = x - shift.

    The database adds up d and d squared; shifting by a value near the data (the step's limit)
    keeps the subtraction below from cancelling away the digits that matter.
    """
    if n == 0:
        return math.nan, math.nan
    mean_d = sum_d / n
    if n < 2:
        return mean_d + shift, math.nan
    var = max(0.0, (sum_d2 - n * mean_d * mean_d) / (n - 1))
    return mean_d + shift, math.sqrt(var)
