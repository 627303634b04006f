"""The upper tail of the F distribution, for the ANOVA interaction test of a gauge study.

rig's runtime needs no scipy, so the regularized incomplete beta function is computed here by its
continued fraction (the modified Lentz method, as in Press et al., Numerical Recipes, 6.4).
"""

from __future__ import annotations

import math

_EPS = 1e-15
_TINY = 1e-300
_MAX_TERMS = 500


def _beta_fraction(a: float, b: float, x: float) -> float:
    """Continued fraction for I_x(a, b), converging fast for x < (a + 1) / (a + b + 2)."""
    qab, qap, qam = a + b, a + 1.0, a - 1.0
    c, d = 1.0, 1.0 - qab * x / qap
    d = 1.0 / (d if abs(d) > _TINY else _TINY)
    h = d
    for m in range(1, _MAX_TERMS + 1):
        m2 = 2 * m
        for aa in (
            m * (b - m) * x / ((qam + m2) * (a + m2)),
            -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2)),
        ):
            d = 1.0 + aa * d
            d = 1.0 / (d if abs(d) > _TINY else _TINY)
            c = 1.0 + aa / c
            c = c if abs(c) > _TINY else _TINY
            h *= d * c
        if abs(d * c - 1.0) < _EPS:
            break
    return h


def regularized_beta(a: float, b: float, x: float) -> float:
    """I_x(a, b) for a, b > 0 and 0 <= x <= 1."""
    if not (a > 0 and b > 0 and 0.0 <= x <= 1.0):
        raise ValueError(f"regularized_beta needs a, b > 0 and 0 <= x <= 1, got {a}, {b}, {x}")
    if x in (0.0, 1.0):
        return x
    log_front = (
        math.lgamma(a + b) - math.lgamma(a) - math.lgamma(b) + a * math.log(x) + b * math.log1p(-x)
    )
    front = math.exp(log_front)
    if x < (a + 1.0) / (a + b + 2.0):
        return front * _beta_fraction(a, b, x) / a
    return 1.0 - front * _beta_fraction(b, a, 1.0 - x) / b


def f_upper_tail(f: float, df_num: float, df_den: float) -> float:
    """P(F > f) for an F(df_num, df_den) variable: the p-value of an ANOVA F ratio."""
    if math.isnan(f):
        return math.nan
    if f <= 0.0:
        return 1.0
    if math.isinf(f):
        return 0.0
    return regularized_beta(df_den / 2.0, df_num / 2.0, df_den / (df_den + df_num * f))
