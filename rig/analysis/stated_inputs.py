"""A stated temperature or pressure as the Monte Carlo draws it: around the stated value with
the standard uncertainty the step states for it.

A step that states the temperature (``ntc``, ``rtd``) or pressure (``ratiometric``) its sensor
is judged at, with ``temperature_u`` or ``pressure_u``, says that a good unit at the bench is
somewhere near that figure, not at it.  Only an estimate and its standard uncertainty are known,
so the true value is drawn from a Gaussian with that mean and standard deviation (JCGM 101:2008,
GUM Supplement 1, 6.4.7).  The room is one room for the whole run: one draw per unit, shared by
every step that states the same figure, and it moves the sensor itself, so every reading of
that sensor follows it.  Pure computation.
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from rig.analysis.good_units import Draw, FloatArray
from rig.config.unit_file import NtcSensor, RatiometricSensor, RtdSensor, UnitModel
from rig.quantity import format_quantity
from rig.steps import StepSpec
from rig.steps.model_steps import stated_reference, stated_temperature

NORMAL = "normal"
NORMAL_STATED = (
    "Gaussian around the stated value with its stated standard uncertainty, as JCGM 101:2008 "
    "6.4.7 assigns where only an estimate and its standard uncertainty are known; one draw per "
    "unit shared by every step that states the figure, moving the sensor for every reading of it"
)

SENSOR_KINDS: dict[str, tuple[type, ...]] = {
    "temperature": (NtcSensor, RtdSensor),
    "pressure": (RatiometricSensor,),
}
"""The unit's sensors a stated figure of each quantity can belong to."""

ELEMENT_PREFIX = {NtcSensor: "ntc:", RtdSensor: "rtd:", RatiometricSensor: "rat:"}
"""How a sensor's element is named in the unit's circuit (``rig.unit_circuit``)."""

UNIT = {"temperature": ("degC", "K"), "pressure": ("Pa", "Pa")}


@dataclass(frozen=True)
class StatedInput:
    """One stated figure (``quantity`` at ``value``) and the largest u any step states for it."""

    quantity: str
    value: float
    u: float
    steps: tuple[str, ...]

    @property
    def key(self) -> tuple[str, float]:
        return self.quantity, self.value

    def draw(self) -> Draw:
        """The line of ``rig limits``' table of draws."""
        value_unit, u_unit = UNIT[self.quantity]
        spread = f"{format_quantity(self.value, value_unit)}, u = {format_quantity(self.u, u_unit)}"
        what = f"stated {self.quantity} ({', '.join(self.steps)})"
        return Draw(what, spread, NORMAL, NORMAL_STATED)


def stated_of(spec: StepSpec) -> tuple[str, float, float] | None:
    """(quantity, value, u) of a step's stated temperature or pressure with a u above zero;
    None where it states none, or states it as exact."""
    if spec.kind in ("ntc", "rtd"):
        stated = stated_temperature(spec)
        if stated is not None and stated[1] > 0:
            return "temperature", stated[0], stated[1]
    if spec.kind == "ratiometric":
        u = float(spec.params.get("pressure_u_pa") or 0.0)
        if u > 0:
            return "pressure", float(spec.params["pressure_pa"]), u
    return None


def stated_u_names(spec: StepSpec) -> list[str]:
    """The stated inputs of a step that carry a u above zero, by their key (``temperature``,
    ``pressure``, ``reference``): what its U is made of besides the meter.  The divider's
    reference is not drawn by the Monte Carlo (the unit file's controller source is the true
    reference, drawn with its own tolerance), so it is named here and not in ``stated_of``."""
    found = [] if (stated := stated_of(spec)) is None else [stated[0]]
    reference = stated_reference(spec) if spec.kind == "ntc" else None
    if reference is not None and reference[1] > 0:
        found.append("reference")
    return found


def stated_inputs(specs: Iterable[StepSpec]) -> dict[str, StatedInput]:
    """Step id -> the stated figure it shares with every step that states the same one."""
    found: dict[tuple[str, float], StatedInput] = {}
    of_step: dict[str, tuple[str, float]] = {}
    for spec in specs:
        stated = stated_of(spec)
        if stated is None:
            continue
        quantity, value, u = stated
        key = (quantity, value)
        was = found.get(key)
        steps = (*was.steps, spec.id) if was else (spec.id,)
        found[key] = StatedInput(quantity, value, max(u, was.u if was else 0.0), steps)
        of_step[spec.id] = key
    return {step: found[key] for step, key in of_step.items()}


def candidate_sensors(unit: UnitModel, quantity: str) -> list[str]:
    """The unit's sensors a stated ``quantity`` may move (which it does move is found from the
    readings that depend on them)."""
    kinds = SENSOR_KINDS[quantity]
    return [name for name, s in unit.sensors.items() if isinstance(s, kinds)]


def sensor_of(element: str, unit: UnitModel, quantity: str) -> str | None:
    """The sensor of ``quantity``'s kinds whose circuit element is ``element``; None if none."""
    for name in candidate_sensors(unit, quantity):
        prefix = ELEMENT_PREFIX[type(unit.sensors[name])]
        if element == f"{prefix}{name}" or element == f"{prefix}{name}:gain":
            return name
    return None


def pilot_shifts(unit: UnitModel, inputs: Sequence[StatedInput], n: int) -> dict[str, FloatArray]:
    """Shifts for a pilot sample: every sensor a stated quantity may move, at the largest u of
    that quantity, so that the readings which follow a sensor keep it as a varied element."""
    rng = np.random.default_rng(24680)
    shifts: dict[str, FloatArray] = {}
    for quantity in SENSOR_KINDS:
        u = max((s.u for s in inputs if s.quantity == quantity), default=0.0)
        if u > 0:
            for name in candidate_sensors(unit, quantity):
                shifts[name] = rng.standard_normal(n) * u
    return shifts


def drawn_shifts(
    rng: np.random.Generator,
    n: int,
    inputs: Sequence[StatedInput],
    sensors: Mapping[str, tuple[str, float]],
    pilot: Iterable[str],
) -> dict[str, FloatArray]:
    """Each unit's shift of every sensor the pilot moved: one Gaussian draw per stated figure
    and unit (``sensors``: sensor -> the figure it is read at), zero for the others."""
    z = {s.key: rng.standard_normal(n) * s.u for s in inputs}
    return {name: z[sensors[name]] if name in sensors else np.zeros(n) for name in pilot}
