"""Loading and validating rig's data files (unit, fixture, station, sequence): TOML, never code."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import TypeVar

from rig.errors import ConfigError, Problem

T = TypeVar("T")


def load_collecting(
    load: Callable[[Path], T], path: Path | None, problems: list[Problem]
) -> T | None:
    """``load(path)``, or None with its problems added to ``problems`` (None for no path): so
    that a command reads every file it is given and lists all their problems at once."""
    if path is None:
        return None
    try:
        return load(path)
    except ConfigError as exc:
        problems.extend(exc.problems)
        return None
