"""Fault specs: short strings of our own that say what is wrong with a unit.

``KIND:TARGET[=VALUE]``, for example::

    open:temp_signal              the wire is broken
    short-ground:temp_signal      the wire touches bench ground half way along
    short-ref:temp_signal         the wire touches the controller's reference (5 V)
    short-feed:temp_signal        the wire touches the controller's feed (12 V)
    short:temp_signal,temp_return two wires touch each other
    series:temp_return=15ohm      extra resistance at the wire's first end (a corroded pin)
    drift:coolant=+8%             a sensor reads off its curve (resistance or output fraction)
    intermittent:temp_signal=0.3  the wire is open for that fraction of readings

Several faults may be active at once.  Specs are checked against the unit model: every target must
be a part of the unit.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

from rig.config.unit_file import UnitModel
from rig.errors import ConfigError, Problem
from rig.quantity import QuantityError, parse_quantity

WIRE_KINDS = ("open", "short-ground", "short-ref", "short-feed", "series", "intermittent")
KINDS = (*WIRE_KINDS, "short", "drift")

_SPEC = re.compile(r"^\s*([a-z-]+):([A-Za-z0-9_.,-]+)(?:=(.+))?\s*$")


@dataclass(frozen=True)
class Fault:
    kind: str
    targets: tuple[str, ...]
    value: float | None = None

    @property
    def spec(self) -> str:
        text = f"{self.kind}:{','.join(self.targets)}"
        if self.kind == "series" and self.value is not None:
            text += f"={self.value:g}ohm"
        elif self.kind == "drift" and self.value is not None:
            text += f"={self.value:+g}%"
        elif self.kind == "intermittent" and self.value is not None:
            text += f"={self.value:g}"
        return text

    def __str__(self) -> str:
        return self.spec


def parse_fault(spec: str, source: str = "fault spec") -> Fault:
    """Parse one spec; raises ``ConfigError`` naming the spec and what was expected."""

    def fail(message: str) -> ConfigError:
        return ConfigError([Problem(source, spec, message)])

    match = _SPEC.match(spec)
    if not match:
        raise fail("expected KIND:TARGET[=VALUE], e.g. open:temp_signal or series:gnd=15ohm")
    kind, target_text, value_text = match.groups()
    if kind not in KINDS:
        raise fail(f"unknown fault kind {kind!r}; expected one of {', '.join(KINDS)}")
    targets = tuple(t for t in target_text.split(",") if t)
    if kind == "short":
        if len(targets) != 2 or targets[0] == targets[1]:
            raise fail("a short between wires names two different wires: short:WIRE_A,WIRE_B")
    elif len(targets) != 1:
        raise fail(f"{kind} takes one target, found {len(targets)}")
    value: float | None = None
    try:
        if kind == "series":
            if value_text is None:
                raise fail("series needs the added resistance, e.g. series:gnd=15ohm")
            value = parse_quantity(value_text, "ohm")
            if value <= 0:
                raise fail("the added resistance must be positive")
        elif kind == "drift":
            if value_text is None:
                raise fail("drift needs a percentage, e.g. drift:coolant=+8%")
            value = parse_quantity(value_text, "%")
            if value <= -100:
                raise fail("a drift must be above -100 %")
        elif kind == "intermittent":
            value = 0.5 if value_text is None else float(value_text)
            if not 0.0 < value <= 1.0:
                raise fail("the open fraction must be above 0 and at most 1")
        elif value_text is not None:
            raise fail(f"{kind} takes no value")
    except (QuantityError, ValueError) as exc:
        if isinstance(exc, ConfigError):
            raise
        raise fail(str(exc)) from None
    return Fault(kind, targets, value)


def check_faults(faults: list[Fault], unit: UnitModel, source: str = "fault spec") -> None:
    """Every target must exist in the unit; raises ``ConfigError`` listing all that do not."""
    problems = []
    for fault in faults:
        if fault.kind == "drift":
            if fault.targets[0] not in unit.sensors:
                problems.append(
                    Problem(
                        source,
                        fault.spec,
                        f"no sensor {fault.targets[0]!r} in {unit.path.name}; "
                        f"sensors are {', '.join(sorted(unit.sensors)) or 'none'}",
                    )
                )
            continue
        for target in fault.targets:
            if target not in unit.wires:
                problems.append(
                    Problem(
                        source,
                        fault.spec,
                        f"no wire {target!r} in {unit.path.name}; "
                        f"wires are {', '.join(sorted(unit.wires)) or 'none'}",
                    )
                )
        if fault.kind in ("short-ref", "short-feed"):
            wanted = "reference" if fault.kind == "short-ref" else "feed"
            if unit.controller is None or unit.controller.source(wanted) is None:
                problems.append(
                    Problem(source, fault.spec, f"the unit has no controller source {wanted!r}")
                )
    if problems:
        raise ConfigError(problems)


def parse_faults(specs: list[str], unit: UnitModel, source: str = "fault spec") -> list[Fault]:
    """Parse and check several specs, reporting every problem at once."""
    problems: list[Problem] = []
    faults: list[Fault] = []
    for spec in specs:
        try:
            faults.append(parse_fault(spec, source))
        except ConfigError as exc:
            problems.extend(exc.problems)
    try:
        check_faults(faults, unit, source)
    except ConfigError as exc:
        problems.extend(exc.problems)
    if problems:
        raise ConfigError(problems)
    return faults
