"""What the SCPI drivers share: the session, the dialect table, the identity and the error queue.

Each driver (``ScpiDmm``, ``ScpiSupply``) is then its own table of commands (``DIALECT``) and
the few methods that use it.
"""

from __future__ import annotations

from collections.abc import Mapping
from typing import ClassVar

from drivers.base import InstrumentIdentity
from drivers.visa_session import (
    VisaSession,
    merge_dialect,
    raise_queued_errors,
    resource_problem,
    timeout_setting,
)
from rig.errors import ConfigError, InstrumentProtocolError, Problem

KNOWN_SETTINGS = ("dialect", "timeout_ms")


def parse_identity(reply: str, where: Mapping[str, str]) -> InstrumentIdentity:
    """The four ``*IDN?`` fields (IEEE 488.2-1992 §10.14)."""
    fields = [f.strip() for f in reply.split(",")]
    if len(fields) != 4:
        raise InstrumentProtocolError(
            f"expected four comma-separated *IDN? fields, got {reply!r}", **where
        )
    return InstrumentIdentity(*fields)


class ScpiDriver:
    """Constructor ``(name, resource, settings)``: the dialect merged from the settings, and one
    session; a subclass names its command roles in ``DIALECT`` (with ``identity`` and
    ``error`` among them)."""

    DIALECT: ClassVar[Mapping[str, str]]

    def __init__(self, name: str, resource: str, settings: Mapping[str, object]) -> None:
        found = self.setting_problems(resource, settings)
        if found:  # a station built by a program, not loaded from a file, is checked here
            where = f"settings of instrument {name}"
            raise ConfigError([Problem(where, key, message) for key, message in found])
        self.name = name
        self.resource = resource
        self._commands = merge_dialect(self.DIALECT, name, settings)
        self._session = VisaSession(name, resource, settings)

    @classmethod
    def setting_problems(
        cls, resource: str, settings: Mapping[str, object]
    ) -> list[tuple[str, str]]:
        """The resource string, unknown settings, ``timeout_ms`` and the dialect's roles."""
        problems: list[tuple[str, str]] = []
        bad_resource = resource_problem(resource)
        if bad_resource:
            problems.append(("resource", bad_resource))
        for key in settings:
            if key not in KNOWN_SETTINGS:
                known = ", ".join(KNOWN_SETTINGS)
                problems.append((f"settings.{key}", f"unknown setting; known: {known}"))
        for check in (
            lambda: timeout_setting("", settings),
            lambda: merge_dialect(cls.DIALECT, "", settings),
        ):
            try:
                check()
            except ConfigError as exc:
                problems.extend((f"settings.{p.key}", p.message) for p in exc.problems)
        return problems

    def identity(self) -> InstrumentIdentity:
        command = self._commands["identity"]
        return parse_identity(self._session.query(command), self._session.where(command))

    def close(self) -> None:
        self._session.close()

    def check_errors(self, after: str = "") -> None:
        """Empty the error queue; ``InstrumentReportedError`` if it held anything."""
        raise_queued_errors(self._session, self._commands["error"], after)
