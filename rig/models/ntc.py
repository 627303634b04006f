"""NTC thermistor models: Beta and Steinhart-Hart, their fits, and error conversion.

The Beta model is what a data sheet gives in two numbers; Steinhart-Hart (Steinhart and Hart,
Deep-Sea Research 15, 1968) is what a calibration over a wide span needs.  Both answer the same
protocol, so a check can judge a sensor against whichever model its unit file names.
Temperatures are in degC at the interface and in kelvin inside.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Protocol

import numpy as np

from rig.models._common import (
    F,
    FloatArray,
    ModelInputError,
    Real,
    as_array,
    first_bad,
    like,
    require_finite,
    require_positive,
)

KELVIN_OFFSET = 273.15
"""0 degC in kelvin."""


class NtcModel(Protocol):
    """What every thermistor model answers: resistance, temperature and slope."""

    def r_at(self, temp_c: F) -> F:
        """Resistance in ohm at ``temp_c``."""
        ...

    def t_at(self, r_ohm: F) -> F:
        """Temperature in degC at resistance ``r_ohm``."""
        ...

    def dr_dt(self, temp_c: F) -> F:
        """Slope dR/dT in ohm per kelvin at ``temp_c`` (negative for an NTC)."""
        ...


def _kelvin(temp_c: Real) -> FloatArray:
    t = as_array(temp_c, "temp_c")
    bad = ~(t > -KELVIN_OFFSET)
    if np.any(bad):
        raise ModelInputError(
            f"temp_c = {first_bad(t, bad)!r} degC is at or below absolute zero (-273.15 degC)"
        )
    return t + KELVIN_OFFSET


def _ln_r(r_ohm: Real) -> FloatArray:
    r = as_array(r_ohm, "r_ohm")
    bad = ~((r > 0.0) & np.isfinite(r))
    if np.any(bad):
        raise ModelInputError(
            f"r_ohm = {first_bad(r, bad)!r} ohm: a thermistor resistance must be finite and above 0"
        )
    return np.log(r)


def _celsius_from_inverse(inv_t: FloatArray, what: str) -> FloatArray:
    bad = ~(inv_t > 0.0)
    if np.any(bad):
        raise ModelInputError(f"{what}: no temperature above absolute zero gives this resistance")
    return 1.0 / inv_t - KELVIN_OFFSET


@dataclass(frozen=True)
class BetaNtc:
    """R = R0 exp[beta (1/T - 1/T0)]: the two-number model of a thermistor data sheet."""

    r25_ohm: float
    beta_k: float
    t0_c: float = 25.0

    def __post_init__(self) -> None:
        require_positive(self.r25_ohm, "r25_ohm")
        require_positive(self.beta_k, "beta_k")
        require_finite(self.t0_c, "t0_c")
        if self.t0_c <= -KELVIN_OFFSET:
            raise ModelInputError(f"t0_c = {self.t0_c!r} degC is at or below absolute zero")

    @classmethod
    def from_points(cls, p1: tuple[float, float], p2: tuple[float, float]) -> BetaNtc:
        """The Beta model through two (temp_c, r_ohm) points; R0 and T0 are the first point."""
        (t1, r1), (t2, r2) = p1, p2
        k1 = float(_kelvin(t1))
        k2 = float(_kelvin(t2))
        if k1 == k2:
            raise ModelInputError(f"the two points must be at different temperatures, got {t1!r}")
        beta = float(_ln_r(r1) - _ln_r(r2)) / (1.0 / k1 - 1.0 / k2)
        if beta <= 0.0:
            raise ModelInputError(
                f"points ({t1!r}, {r1!r}) and ({t2!r}, {r2!r}) do not fall with temperature "
                "as an NTC must"
            )
        return cls(r25_ohm=float(r1), beta_k=beta, t0_c=float(t1))

    @property
    def _t0_k(self) -> float:
        return self.t0_c + KELVIN_OFFSET

    def r_at(self, temp_c: F) -> F:
        """Resistance in ohm at ``temp_c``."""
        t_k = _kelvin(temp_c)
        return like(self.r25_ohm * np.exp(self.beta_k * (1.0 / t_k - 1.0 / self._t0_k)), temp_c)

    def t_at(self, r_ohm: F) -> F:
        """Temperature in degC at ``r_ohm`` (the Beta equation solved for T)."""
        inv = 1.0 / self._t0_k + (_ln_r(r_ohm) - math.log(self.r25_ohm)) / self.beta_k
        return like(_celsius_from_inverse(inv, f"r_ohm = {r_ohm!r}"), r_ohm)

    def dr_dt(self, temp_c: F) -> F:
        """dR/dT = -beta R / T^2, in ohm per kelvin."""
        t_k = _kelvin(temp_c)
        r = self.r25_ohm * np.exp(self.beta_k * (1.0 / t_k - 1.0 / self._t0_k))
        return like(-self.beta_k * r / t_k**2, temp_c)


@dataclass(frozen=True)
class SteinhartHart:
    """1/T = a + b ln R + c (ln R)^3, T in kelvin and R in ohm.

    ``b`` must be positive (resistance falls with temperature).  ``c`` may be of either sign, as
    a least-squares fit sometimes gives it.
    """

    a: float
    b: float
    c: float

    def __post_init__(self) -> None:
        require_finite(self.a, "a")
        require_positive(self.b, "b")
        require_finite(self.c, "c")

    def t_at(self, r_ohm: F) -> F:
        """Temperature in degC at ``r_ohm``: the equation itself."""
        x = _ln_r(r_ohm)
        inv = self.a + self.b * x + self.c * x**3
        return like(_celsius_from_inverse(inv, f"r_ohm = {r_ohm!r}"), r_ohm)

    def r_at(self, temp_c: F) -> F:
        """Resistance in ohm at ``temp_c``: the cubic in ln R solved in closed form."""
        t_k = _kelvin(temp_c)
        return like(np.exp(self._ln_r_at(1.0 / t_k)), temp_c)

    def dr_dt(self, temp_c: F) -> F:
        """dR/dT = -R / (T^2 (b + 3 c ln^2 R)), in ohm per kelvin."""
        t_k = _kelvin(temp_c)
        x = self._ln_r_at(1.0 / t_k)
        return like(-np.exp(x) / (t_k**2 * (self.b + 3.0 * self.c * x**2)), temp_c)

    def _ln_r_at(self, inv_t: FloatArray) -> FloatArray:
        """Solve c x^3 + b x + (a - 1/T) = 0 for x = ln R, choosing a form free of cancellation.

        Cardano's u + v loses digits when c is small (the Beta-like case), so for p = b/c > 0 the
        root is taken as -q / (u^2 + v^2 + p/3), whose terms are all positive.
        """
        a, b, c = self.a, self.b, self.c
        x_linear = (inv_t - a) / b
        if c == 0.0:
            return x_linear
        p = b / c
        q = (a - inv_t) / c
        disc = (q / 2.0) ** 2 + (p / 3.0) ** 3
        with np.errstate(invalid="ignore", divide="ignore"):
            s = np.sqrt(disc)
            sign = np.where(q >= 0.0, 1.0, -1.0)
            u = -sign * np.cbrt(np.abs(q) / 2.0 + s)
            v = -p / (3.0 * u)
            one_root = -q / (u**2 + v**2 + p / 3.0) if p > 0.0 else u + v
            if p > 0.0:
                return np.asarray(one_root, dtype=np.float64)
            # p < 0: three real roots where disc < 0; take the one nearest the c = 0 solution,
            # which lies on the monotonic branch the thermistor is on.
            m = 2.0 * math.sqrt(-p / 3.0)
            arg = np.clip(3.0 * q / (p * m), -1.0, 1.0)
            phi = np.arccos(arg) / 3.0
            roots = np.stack([m * np.cos(phi - 2.0 * math.pi * k / 3.0) for k in range(3)])
            nearest = np.take_along_axis(
                roots, np.argmin(np.abs(roots - x_linear), axis=0)[np.newaxis, ...], axis=0
            )[0]
            return np.asarray(np.where(disc >= 0.0, one_root, nearest), dtype=np.float64)


def beta_as_steinhart_hart(model: BetaNtc) -> SteinhartHart:
    """The Beta model written as Steinhart-Hart: a = 1/T0 - ln(R0)/beta, b = 1/beta, c = 0."""
    t0_k = model.t0_c + KELVIN_OFFSET
    return SteinhartHart(
        a=1.0 / t0_k - math.log(model.r25_ohm) / model.beta_k, b=1.0 / model.beta_k, c=0.0
    )


def _design(temps_c: Real, r_ohm: Real) -> tuple[FloatArray, FloatArray]:
    t = np.atleast_1d(_kelvin(temps_c)).ravel()
    x = np.atleast_1d(_ln_r(r_ohm)).ravel()
    if t.shape != x.shape:
        raise ModelInputError(
            f"temps_c and r_ohm must have the same length, got {t.size} and {x.size}"
        )
    return np.column_stack([np.ones_like(x), x, x**3]), 1.0 / t


def _checked(coef: FloatArray) -> SteinhartHart:
    if not (coef[1] > 0.0):
        raise ModelInputError(
            "the points do not describe an NTC thermistor: the fitted b coefficient is "
            f"{coef[1]!r}, expected above 0"
        )
    return SteinhartHart(a=float(coef[0]), b=float(coef[1]), c=float(coef[2]))


def steinhart_hart_from_points(pts: Sequence[tuple[float, float]]) -> SteinhartHart:
    """Steinhart-Hart through exactly three (temp_c, r_ohm) points: a 3x3 linear solve."""
    if len(pts) != 3:
        raise ModelInputError(f"expected exactly three (temp_c, r_ohm) points, got {len(pts)}")
    temps = [float(p[0]) for p in pts]
    if len(set(temps)) != 3:
        raise ModelInputError(f"the three points must be at different temperatures, got {temps}")
    m, y = _design(np.array(temps), np.array([float(p[1]) for p in pts]))
    try:
        coef = np.linalg.solve(m, y)
    except np.linalg.LinAlgError as exc:
        raise ModelInputError(f"the three points {list(pts)} give a singular system") from exc
    return _checked(np.asarray(coef, dtype=np.float64))


def steinhart_hart_fit(temps_c: Real, r_ohm: Real) -> SteinhartHart:
    """Least-squares Steinhart-Hart through three or more points, fitted in 1/T.

    Unweighted in 1/T, which weights points nearly equally in temperature over a typical span.
    """
    m, y = _design(temps_c, r_ohm)
    if y.size < 3:
        raise ModelInputError(f"a Steinhart-Hart fit needs at least three points, got {y.size}")
    coef, _res, rank, _sv = np.linalg.lstsq(m, y, rcond=None)
    if rank < 3:
        raise ModelInputError("the points do not determine a Steinhart-Hart curve (rank < 3)")
    return _checked(np.asarray(coef, dtype=np.float64))


def temp_error_from_r_error(model: NtcModel, r_ohm: F, dr_ohm: F) -> F:
    """Temperature error in kelvin that a resistance error ``dr_ohm`` causes at ``r_ohm``.

    First order: dT = dR / (dR/dT), signed (a resistance reading too high reads too cold).
    """
    temp_c = model.t_at(r_ohm)
    return like(as_array(dr_ohm, "dr_ohm") / as_array(model.dr_dt(temp_c), "dr_dt"), r_ohm)
