"""Drivers found by name through the ``rig.drivers`` entry-point group.

A shop adds its own meter or relay board by shipping a package that declares an entry point in this
group; nothing here lists drivers by hand.  A driver whose optional dependency is missing does not
break start-up: it explains what is missing when, and only when, it is asked for.
"""

from __future__ import annotations

import logging
from collections.abc import Mapping
from importlib.metadata import EntryPoint, entry_points

from drivers.base import Instrument
from rig.errors import RigError

log = logging.getLogger(__name__)

GROUP = "rig.drivers"


def _entry_points() -> dict[str, EntryPoint]:
    return {ep.name: ep for ep in entry_points(group=GROUP)}


def driver_names() -> list[str]:
    """Names of every registered driver, loadable or not."""
    return sorted(_entry_points())


def load_driver(name: str) -> type[Instrument]:
    """The driver class registered as ``name``."""
    found = _entry_points()
    ep = found.get(name)
    if ep is None:
        known = ", ".join(sorted(found)) or "none"
        raise RigError(f"unknown driver {name!r}; known drivers: {known}")
    try:
        obj = ep.load()
    except ImportError as error:
        missing = f" (module {error.name!r} is not installed)" if error.name else ""
        raise RigError(
            f"driver {name!r} ({ep.value}) cannot be loaded: {error}{missing}; install the "
            f"package that provides it, or choose another driver"
        ) from error
    except AttributeError as error:
        raise RigError(
            f"driver {name!r} points at {ep.value}, which does not exist: {error}"
        ) from error
    if not (isinstance(obj, type) and issubclass(obj, Instrument)):
        raise RigError(
            f"driver {name!r} ({ep.value}) is not an instrument driver class "
            f"(expected a subclass of drivers.base.Instrument, found {obj!r})"
        )
    return obj


def open_instrument(
    driver: str, name: str, resource: str, settings: Mapping[str, object]
) -> Instrument:
    """Load ``driver`` and open instrument ``name`` at ``resource`` with its ``settings``."""
    cls = load_driver(driver)
    log.debug("opening %s with driver %s at %s", name, driver, resource)
    return cls(name, resource, settings)  # type: ignore[call-arg]
