"""Shared plumbing for the pure models: the input error, array handling and domain checks.

Every model accepts a float or a numpy array and answers in the same shape, so one function
serves a single reading and a Monte Carlo run alike.  Checks raise ``ModelInputError``, which is
both a ``RigError`` (the CLI shows it without a traceback) and a ``ValueError`` (what Python code
expects from a bad argument).
"""

from __future__ import annotations

from typing import Any, TypeAlias, TypeVar

import numpy as np
from numpy.typing import NDArray

from rig.errors import RigError

FloatArray: TypeAlias = NDArray[np.float64]
Real: TypeAlias = float | FloatArray
"""A float or an array of floats: what every model accepts."""

F = TypeVar("F", float, FloatArray)
"""One argument's shape decides the result's shape: float in, float out; array in, array out."""


class ModelInputError(RigError, ValueError):
    """An argument is outside what a model or a judging function can take; says what and why."""


def as_array(value: Real, name: str) -> FloatArray:
    """Turn a float or array into a float array, with a clear error for anything else."""
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise ModelInputError(
            f"{name} must be a number or an array of numbers, got {value!r}"
        ) from exc
    return arr


def like(result: FloatArray, template: F) -> F:
    """Give ``result`` the shape kind of ``template``: a Python float for a scalar input."""
    if np.ndim(template) == 0 and not isinstance(template, np.ndarray):
        out: Any = float(result)
    else:
        out = np.asarray(result, dtype=np.float64)
    return out


def shaped(result: FloatArray, *inputs: Real) -> Real:
    """A float when every input was a scalar, else the (broadcast) array."""
    if all(np.ndim(x) == 0 and not isinstance(x, np.ndarray) for x in inputs):
        return float(result)
    return np.asarray(result, dtype=np.float64)


def first_bad(arr: FloatArray, bad: NDArray[np.bool_]) -> float:
    """The first offending value, to name it in an error message."""
    return float(np.asarray(arr)[bad].flat[0]) if np.ndim(arr) else float(arr)


def require_finite(value: float, name: str) -> float:
    """A parameter that must be a finite number."""
    try:
        x = float(value)
    except (TypeError, ValueError) as exc:
        raise ModelInputError(f"{name} must be a number, got {value!r}") from exc
    if not np.isfinite(x):
        raise ModelInputError(f"{name} must be a finite number, got {x!r}")
    return x


def require_positive(value: float, name: str) -> float:
    """A parameter that must be a finite number above zero."""
    x = require_finite(value, name)
    if x <= 0.0:
        raise ModelInputError(f"{name} must be greater than zero, got {x!r}")
    return x


def check_range(arr: FloatArray, name: str, low: float, high: float, unit: str) -> None:
    """Raise if any element lies outside [low, high] (NaN included), naming the first one."""
    bad = ~((arr >= low) & (arr <= high))
    if np.any(bad):
        raise ModelInputError(
            f"{name} = {first_bad(arr, bad)!r} {unit} is outside the valid range "
            f"{low:g} to {high:g} {unit}"
        )
