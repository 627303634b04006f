"""What every step kind provides, and the data a step carries from file to record.

A step kind is a small class registered by name in ``rig.steps.KINDS``: it reads its own keys from
the sequence file, says which routes (relay sets) it will use so the planner can order and check
them, and measures through a ``StepContext`` that the engine provides.  Adding a step kind means
adding one such class; nothing else in the engine changes.
"""

from __future__ import annotations

import math
from abc import ABC, abstractmethod
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

from drivers.base import MeterFunction
from rig.config.reader import Section
from rig.judge.decision import DecisionRule, Limits
from rig.routing import Route

if TYPE_CHECKING:
    from rig.config.fixture import FixtureMap
    from rig.errors import Problem
    from rig.judge.reference_probe import ReferenceProbe
    from rig.steps.context import StepContext


@dataclass(frozen=True)
class SupplyRequest:
    """A step that powers the unit from the bench supply through two pins."""

    pos: str
    neg: str
    volts: float
    limit_a: float


@dataclass
class StepSpec:
    """One step as read from the sequence file, with its kind-specific parameters."""

    id: str
    kind: str
    title: str
    key: str
    """Where the step is in its file (``steps[3]``), for messages."""
    pins: dict[str, str] = field(default_factory=dict)
    pin_keys: dict[str, str] = field(default_factory=dict)
    """The key a pin was read from where it is not its role (``supply_pos`` from ``supply.pos``;
    a ground drop's ``hi`` is its ``pin``), for messages about the pin."""
    limits: Limits | None = None
    nplc: float = 1.0
    range_: float | None = None
    rule: DecisionRule = DecisionRule.SIMPLE
    supply: SupplyRequest | None = None
    params: dict[str, Any] = field(default_factory=dict)
    depends_on: tuple[str, ...] = ()
    inputs: dict[str, tuple[str, str]] = field(default_factory=dict)
    """Earlier steps whose value this one takes, by the key that names them
    (``temperature_from``): the step's id and the unit the value must be in."""
    barrier: bool = False
    """Operator prompts and soaks: nothing is moved across them when reordering."""
    settle_s: float | None = None
    """How long the circuit takes to settle after a change of route, when the engineer knows it
    (from the circuit's time constants): rig waits that long and reads once.  None: not known,
    so rig proves each reading settled by reading until two agree."""


EarlierSteps = Callable[[str], StepSpec | None]
"""A sequence's steps by id (None for an id it has not): what a step's bounds may rest on."""


@dataclass(frozen=True)
class Reading:
    """One raw reading, kept exactly as the instrument gave it."""

    role: str
    function: str
    value: float
    range_: float | None
    nplc: float
    taken_at: float
    u_std: float = math.nan


@dataclass
class Outcome:
    """What a step measured and computed, before judging."""

    value: float
    unit: str
    u_std: float
    limits: Limits | None
    readings: list[Reading] = field(default_factory=list)
    predicted: float | None = None
    extras: dict[str, float] = field(default_factory=dict)
    settle_s: float = 0.0
    note: str = ""
    ends_run: str = ""
    """Why the run must end after this step, in words (a declined prompt the sequence says stops
    the run); empty where the run goes on.  The step's result is stored first."""


class StepKind(ABC):
    """A kind of step: its name in files, the unit of its value, parsing, routes and measuring."""

    name: str
    unit: str
    function: MeterFunction | None = MeterFunction.DC_VOLTS
    limits_in_meter_units: bool = True
    """False where the judged value is not the meter's own reading (a temperature, a fraction,
    a prediction-relative limit): the planner then cannot pick a range from the limits."""

    def parameter_text(self, key: str, recorded: str) -> str:
        """A recorded model parameter (``model_parameters``) as a report shows it to people: the
        record's own text, unless its unit alone would mislead a reader.  The record itself is
        kept as it is, to be parsed."""
        return recorded

    def one_reading(self, spec: StepSpec) -> str | None:
        """The role of the step's only reading, for kinds whose run is: the supply as the step
        states, one route, one meter reading of ``meter_function(spec)`` at the step's range
        and NPLC, nothing else on the bench.  Such steps in a row on one route share one query
        (``rig.read_ahead``).  None for every other kind."""
        return None

    routes_in_order: bool = False
    """True for kinds whose run asks exactly this of the bench: ``ctx.power(spec.supply)``, then
    one ``ctx.measure_on`` on each of ``routes(spec)`` in order, and nothing after the last.  The
    engine then knows a step's last reading when it comes and the next step's first route
    before it starts, and sends that route's relay change at once: the contacts move while the
    step is computed, judged and filed."""
    judged: bool = True
    """False for kinds that measure nothing (a prompt, a soak): no decision rule applies."""
    gives: str | None = None
    """The unit of the value this kind measures that another step may take as an input (a
    temperature in degC for ``temperature_from``, a voltage for ``reference_from``); None
    where the value is no level another step can use (a drop, a count of faults, a reading
    judged against a model, an answer, a wait)."""
    small_is_good: bool = False
    """True for kinds whose good value is near zero and only its size matters (a voltage drop
    along a wire or to ground): limits proposed for them bound the size alone (``max``), since
    a unit better than the ones sampled must not fail a lower limit."""
    overload_is_a_result: bool = False
    """True where an overload reading is itself a result the step judges (an isolation reading
    above the range proves at least the range): the engine's reading guard then leaves the
    verdict to the step."""

    def meter_function(self, spec: StepSpec) -> MeterFunction | None:
        """What the meter measures for this step's judged reading."""
        return self.function

    @abstractmethod
    def parse(self, sec: Section, spec: StepSpec) -> None:
        """Read the kind's own keys into ``spec`` (pins, limits, params); record problems."""

    def routes(self, spec: StepSpec) -> list[Route]:
        """The routes the step uses in order (for planning, interlocks and relay counting)."""
        return []

    @abstractmethod
    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        """Measure and compute; raise ``InstrumentError`` when the bench fails."""

    def model_parameters(self, spec: StepSpec) -> dict[str, str]:
        """What the step's reading is compared with besides its limits: the parameters of the
        sensor model it predicts from, by the key the sequence file gives each, as text with
        units.  Stored with the step's result, since a reviewer of the record must see them
        (the file itself is kept only as a path and a hash).  Here: none."""
        return {}

    def references(self, spec: StepSpec) -> tuple[str, ...]:
        """Ids of earlier steps this one reads (checked at load time)."""
        return spec.depends_on

    def fixture_problems(self, spec: StepSpec, fixture: FixtureMap) -> list[tuple[str, str]]:
        """What the step asks of the station's fixture beyond its pins and routes that the
        fixture cannot give, as (key under the step, message): found when the plan is built,
        before anything moves.  Here: nothing."""
        return []

    def data_file_problems(self, spec: StepSpec, fixture: FixtureMap) -> list[Problem]:
        """Problems of a data file the step reads besides the sequence (a wire list) once
        joined to the fixture, each at that file's own line: reported once however many steps
        read the file, and the step's routes are then not checked.  Here: none."""
        return []

    def check_warnings(
        self, spec: StepSpec, earlier: EarlierSteps, probe: ReferenceProbe | None
    ) -> list[str]:
        """What ``rig check`` should tell the engineer about the step that is no error: a
        judgement the file's own figures make weaker than it looks (``probe``: the station's
        reference thermometer, None where not stated).  Here: nothing."""
        return []

    def autoranged_readings(self, spec: StepSpec, held: float | None) -> int:
        """How many of the step's readings pay for autorange (the meter pays it on a change of
        range), with ``held`` the range the planner holds for the step (None: none): here one
        for a step that measures without a held range."""
        return 1 if held is None else 0

    def largest_reading(self, spec: StepSpec, earlier: EarlierSteps) -> float | None:
        """The largest |reading|, in the meter's unit, that a passing unit can give, or None
        where the file does not bound it: the planner holds the smallest range that holds it,
        so no reading pays for autorange.  Here: the largest |limit| where the limits are in
        the meter's unit."""
        if spec.limits is None or not self.limits_in_meter_units:
            return None
        bounds = [abs(b) for b in (spec.limits.low, spec.limits.high) if b is not None]
        return max(bounds) if bounds else None
