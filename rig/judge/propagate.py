"""First-order propagation of uncertainty from readings to a computed value.

u_c^2 = sum_i sum_j c_i c_j r_ij u_i u_j with sensitivities c_i = df/dx_i (JCGM 100:2008, GUM,
5.1-5.2).  Two readings on the same range of the same meter share its gain and offset errors, so
they are correlated; a difference then cancels part of the meter's error, a sum does not.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from rig.judge.accuracy import SQRT3, AccuracySpec
from rig.models._common import ModelInputError, require_finite
from rig.models.ntc import NtcModel

DEFAULT_K = 2.0
"""Coverage factor for about 95 % with a normal distribution (GUM 6.2)."""


def _correlation_coefficient(r: float) -> float:
    r = require_finite(r, "correlation")
    if not -1.0 <= r <= 1.0:
        raise ModelInputError(f"correlation = {r!r}: a correlation coefficient lies in -1 to 1")
    return r


def _uncertainty(u: float, name: str) -> float:
    u = require_finite(u, name)
    if u < 0.0:
        raise ModelInputError(f"{name} = {u!r}: a standard uncertainty is 0 or above")
    return u


def combine(
    sensitivities: Sequence[float],
    uncertainties: Sequence[float],
    correlation: Sequence[Sequence[float]] | None = None,
) -> float:
    """Combined standard uncertainty u_c of y = f(x_1..x_n) (GUM 5.1-5.2).

    ``correlation`` is the n x n matrix of correlation coefficients r_ij (identity if omitted).
    """
    c = np.asarray(sensitivities, dtype=np.float64).ravel()
    u = np.asarray(uncertainties, dtype=np.float64).ravel()
    if c.size != u.size:
        raise ModelInputError(
            f"got {c.size} sensitivities but {u.size} uncertainties: expected one of each per input"
        )
    if not (np.all(np.isfinite(c)) and np.all(np.isfinite(u))):
        raise ModelInputError("sensitivities and uncertainties must be finite numbers")
    if np.any(u < 0.0):
        raise ModelInputError(f"uncertainties must be 0 or above, got {u.tolist()}")
    if correlation is None:
        return float(math.sqrt(float(np.sum((c * u) ** 2))))
    r = np.asarray(correlation, dtype=np.float64)
    if r.shape != (c.size, c.size):
        raise ModelInputError(
            f"the correlation matrix is {r.shape}, expected {c.size} x {c.size} for {c.size} inputs"
        )
    if not np.all(np.isfinite(r)) or np.any(np.abs(r) > 1.0):
        raise ModelInputError("correlation coefficients must be finite and lie in -1 to 1")
    if not np.allclose(r, r.T) or not np.allclose(np.diag(r), 1.0):
        raise ModelInputError("the correlation matrix must be symmetric with ones on its diagonal")
    cu = c * u
    variance = float(cu @ r @ cu)
    if variance < -1e-12 * float(np.sum(cu**2)):
        raise ModelInputError("the correlation matrix is not positive semi-definite")
    return math.sqrt(max(variance, 0.0))


def u_difference(u_a: float, u_b: float, correlation: float = 0.0) -> float:
    """u of a - b: sqrt(u_a^2 + u_b^2 - 2 r u_a u_b).

    0 for independent meters; for two readings on one range of one meter (a voltage drop read
    as the difference of two node voltages) ``u_difference_one_range`` finds r from the spec.
    """
    r = _correlation_coefficient(correlation)
    return combine(
        [1.0, -1.0],
        [_uncertainty(u_a, "u_a"), _uncertainty(u_b, "u_b")],
        [[1.0, r], [r, 1.0]],
    )


def u_difference_one_range(a: float, b: float, spec: AccuracySpec, range_: float) -> float:
    """u of a - b for two readings taken on one range of one meter with accuracy ``spec``.

    Each reading x is taken as x (1 + g) + o_x: g the meter's gain error (the %-of-reading
    part, u(g) = p / (100 sqrt 3)), o_x its %-of-range part (u(o) = q R / (100 sqrt 3), GUM
    4.3.7).  The gain is one error common to both readings, so the two are correlated, with
    r(a, b) = u(g)^2 a b / (u(a) u(b)) where u(x)^2 = (u(g) x)^2 + u(o)^2 (GUM 5.2.2; the
    covariance of two estimates that share an input, GUM F.1.2.3).  The gain part then
    contributes p % of |a - b| only.  The %-of-range part is taken as independent between the
    readings: a data sheet's range term holds noise, linearity and offset drift between
    readings as well as a fixed offset, and only the fixed offset would cancel.  That is
    conservative: were the whole range term a fixed offset, u would be u(g) |a - b| alone.
    """
    a = require_finite(a, "a")
    b = require_finite(b, "b")
    range_ = require_finite(range_, "range_")
    if range_ <= 0.0:
        raise ModelInputError(f"range_ = {range_!r}: expected a range above 0")
    u_gain = spec.pct_reading / 100.0 / SQRT3
    u_offset = spec.pct_range / 100.0 * range_ / SQRT3
    u_a, u_b = math.hypot(u_gain * a, u_offset), math.hypot(u_gain * b, u_offset)
    r = u_gain**2 * a * b / (u_a * u_b) if u_a * u_b > 0.0 else 0.0
    return combine([1.0, -1.0], [u_a, u_b], [[1.0, r], [r, 1.0]])


def u_quotient(v: float, i: float, u_v: float, u_i: float, correlation: float = 0.0) -> float:
    """u of R = V / I, with sensitivities 1/I and -V/I^2."""
    v = require_finite(v, "v")
    i = require_finite(i, "i")
    if i == 0.0:
        raise ModelInputError("i = 0: a quotient V / I needs a current other than 0")
    r = _correlation_coefficient(correlation)
    return combine(
        [1.0 / i, -v / i**2],
        [_uncertainty(u_v, "u_v"), _uncertainty(u_i, "u_i")],
        [[1.0, r], [r, 1.0]],
    )


def u_temperature_from_resistance(model: NtcModel, r_ohm: float, u_r_ohm: float) -> float:
    """u in kelvin of a temperature read through ``model`` from a resistance: u_R / |dR/dT|."""
    u_r = _uncertainty(u_r_ohm, "u_r_ohm")
    slope = float(model.dr_dt(float(model.t_at(float(r_ohm)))))
    if slope == 0.0 or not math.isfinite(slope):
        raise ModelInputError(f"the model's slope dR/dT at {r_ohm!r} ohm is {slope!r}")
    return u_r / abs(slope)


def expanded(u: float, k: float = DEFAULT_K) -> float:
    """Expanded uncertainty U = k u (k = 2 for about 95 %, GUM 6.2)."""
    u = _uncertainty(u, "u")
    k = require_finite(k, "k")
    if k <= 0.0:
        raise ModelInputError(f"coverage factor k = {k!r}: expected above 0")
    return k * u
