"""A step's values handed to a model: what the model refuses is a problem of the file.

The models check their arguments and raise ``ModelInputError`` (``rig/models/_common.py``).  A
step builds models from its file's values while the sequence is loaded and planned; there, such
an error is bad input like any other, so it becomes a problem naming the file, line and key, and
``rig check`` exits 2 with the others, never 3 (which tells scripts the bench failed).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TypeVar

from rig.config.reader import Section
from rig.models import ModelInputError

T = TypeVar("T")


def refused(exc: ModelInputError) -> str:
    """The words of a problem for values a model refused."""
    return f"the step's values are outside what its model takes: {exc}"


def built(sec: Section, key: str, make: Callable[[], T]) -> T | None:
    """``make()``, or None with a problem at ``key`` where the model refuses the values."""
    try:
        return make()
    except ModelInputError as exc:
        sec.problem(key, refused(exc))
        return None
