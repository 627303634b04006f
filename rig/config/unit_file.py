"""The unit model: what sits on the fixture, read from a TOML file of our own design.

A unit file describes the unit under test and its surroundings as circuit parts between named nodes:
harness wires, sensors, the controller emulation (reference, feed, pull-ups), a reference Pt100 at
ambient, capacitances that slow settling, and the ambient conditions.  Node names that are fixture
pins can be reached by the meter; node ``0`` (or ``gnd``) is bench ground.  See
``docs/unit-file.md`` for the full reference.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from rig.config.model_input import above_absolute_zero, read_ratiometric, read_steinhart_hart
from rig.config.reader import Section, TomlDoc
from rig.errors import Problem
from rig.models.copper import area_from_gauge
from rig.models.ratiometric import Ratiometric
from rig.models.rtd import T_MAX_C, T_MIN_C
from rig.quantity import QuantityError, parse_quantity

SENSOR_KINDS = ("ntc", "rtd", "ratiometric", "potentiometer", "switch")
PROBE_CLASSES = ("AA", "A", "B")
_PART_GROUPS = ("wires", "resistors", "sensors", "capacitors")
"""The tables of named parts, whose names must not repeat from one to another."""


@dataclass(frozen=True)
class Wire:
    name: str
    a: str
    b: str
    area_mm2: float
    length_m: float
    gauge: str
    length_tolerance_pct: float = 0.0
    area_tolerance_pct: float = 0.0
    """Cross-section tolerance: how far the conductor may stray from its nominal gauge."""


@dataclass(frozen=True)
class Resistor:
    name: str
    a: str
    b: str
    r_ohm: float
    tolerance_pct: float = 0.0


@dataclass(frozen=True)
class Capacitor:
    name: str
    a: str
    b: str
    c_farad: float


@dataclass(frozen=True)
class Source:
    """A controller-side voltage: its node, relative to the controller ground."""

    name: str
    node: str
    volts: float
    tolerance_pct: float = 0.0


@dataclass(frozen=True)
class NtcSensor:
    name: str
    a: str
    b: str
    r25_ohm: float | None = None
    beta_k: float | None = None
    sh_coefficients: tuple[float, float, float] | None = None
    temp_c: float | None = None
    r25_tolerance_pct: float = 0.0
    beta_tolerance_pct: float = 0.0


@dataclass(frozen=True)
class RtdSensor:
    """A platinum RTD under test (IEC 60751 curve), at ambient unless ``temp_c`` says."""

    name: str
    a: str
    b: str
    r0_ohm: float = 100.0
    temp_c: float | None = None
    tolerance_class: str | None = None
    """IEC 60751 class ("AA", "A", "B"), drawn by ``rig limits``; None: on the curve."""


@dataclass(frozen=True)
class RatiometricSensor:
    name: str
    supply: str
    output: str
    ground: str
    p_low_pa: float
    p_high_pa: float
    fraction_low: float = 0.1
    fraction_high: float = 0.9
    pressure_pa: float | None = None
    quiescent_a: float = 0.005
    r_out_ohm: float = 100.0
    fraction_tolerance_pct: float = 0.0
    """How far its output fraction may stray from the transfer, in percentage points."""


@dataclass(frozen=True)
class Potentiometer:
    name: str
    a: str
    b: str
    wiper: str
    r_ohm: float
    position: float


@dataclass(frozen=True)
class SwitchSensor:
    name: str
    a: str
    b: str
    closed: bool
    r_on_ohm: float = 0.05


Sensor = NtcSensor | RtdSensor | RatiometricSensor | Potentiometer | SwitchSensor


@dataclass(frozen=True)
class ReferenceProbe:
    """A bench Pt100 (or Pt1000) at ambient, wired for 4-wire measurement on pins of its own."""

    force_hi: str
    sense_hi: str
    force_lo: str
    sense_lo: str
    r0_ohm: float = 100.0
    lead_ohm: float = 0.1
    tolerance_class: str | None = None
    """IEC 60751 class ("AA", "A", "B"); None: taken as exact."""


@dataclass
class Controller:
    ground: str
    sources: list[Source] = field(default_factory=list)

    def source(self, name: str) -> Source | None:
        return next((s for s in self.sources if s.name == name), None)


@dataclass
class UnitModel:
    name: str
    path: Path
    fixture_path: Path
    description: str = ""
    fixture_written: str = ""
    """``[unit].fixture`` as written, for a problem put at that key (``fixture_of``)."""
    ambient_c: float = 23.0
    ambient_range_c: tuple[float, float] | None = None
    """Where the ambient may lie on the floor (Monte Carlo limits); None: exactly ``ambient_c``."""
    pressure_pa: float = 101_325.0
    controller: Controller | None = None
    wires: dict[str, Wire] = field(default_factory=dict)
    resistors: dict[str, Resistor] = field(default_factory=dict)
    sensors: dict[str, Sensor] = field(default_factory=dict)
    capacitors: dict[str, Capacitor] = field(default_factory=dict)
    probe: ReferenceProbe | None = None
    source: TomlDoc | None = field(default=None, repr=False, compare=False)
    """The file as read: where its keys are, for what is found after loading."""

    def problem(self, key: str, message: str) -> Problem:
        """A finding about this file made after loading, at the line of ``key``."""
        line = self.source.line_of(key) if self.source is not None else None
        return Problem(str(self.path), key, message, line=line)

    def nodes(self) -> set[str]:
        """Every node the unit file names (fixture pins among them)."""
        found: set[str] = set()
        for wire in self.wires.values():
            found |= {wire.a, wire.b}
        for res in self.resistors.values():
            found |= {res.a, res.b}
        for cap in self.capacitors.values():
            found |= {cap.a, cap.b}
        for sensor in self.sensors.values():
            found |= _sensor_nodes(sensor)
        if self.controller:
            found.add(self.controller.ground)
            found |= {s.node for s in self.controller.sources}
        if self.probe:
            p = self.probe
            found |= {p.force_hi, p.sense_hi, p.force_lo, p.sense_lo}
        return found


def _sensor_nodes(sensor: Sensor) -> set[str]:
    if isinstance(sensor, RatiometricSensor):
        return {sensor.supply, sensor.output, sensor.ground}
    if isinstance(sensor, Potentiometer):
        return {sensor.a, sensor.b, sensor.wiper}
    return {sensor.a, sensor.b}


def load_unit(path: Path | str) -> UnitModel:
    """Read and validate a unit file; raises ``ConfigError`` listing every problem."""
    doc = TomlDoc(Path(path), kind="a unit file (.toml)")
    unit = parse_unit(doc)
    doc.raise_if_problems()
    return unit


def _between(section: Section, name: str = "between") -> tuple[str, str]:
    nodes = section.string_list(name)
    if nodes is None or len(nodes) != 2 or nodes[0] == nodes[1]:
        if nodes is not None:
            section.problem(name, f"expected two different node names, found {nodes!r}")
        return ("?", "?")
    return nodes[0], nodes[1]


def _percent(section: Section, name: str) -> float:
    """A tolerance in %: 0 or above and under 100 %."""
    value = section.quantity(name, "%", None)
    if value is not None and not 0.0 <= value < 100.0:
        section.problem(name, f"expected a tolerance from 0 % to under 100 %, found {value:g} %")
        return 0.0
    return 0.0 if value is None else float(value)


def _in_ambient_span(section: Section, name: str, *values: float) -> bool:
    """Whether an ambient temperature (or range) lies where the models of a bench hold: on the
    reference Pt100's curve, -200 to 850 degC (IEC 60751), where copper's resistance is still
    positive too (its linear model reaches zero near -234 degC); a problem if not."""
    if all(T_MIN_C <= value <= T_MAX_C for value in values):
        return True
    section.problem(
        name,
        f"expected an ambient temperature from {T_MIN_C:g} to {T_MAX_C:g} degC (the reference "
        f"Pt100's curve, IEC 60751), found {section.raw(name)!r}",
    )
    return False


def _temperature_range(section: Section, name: str) -> tuple[float, float] | None:
    """Two temperatures, low first: ``["18 degC", "28 degC"]``."""
    raw = section.raw(name)
    if raw is None:
        return None
    try:
        if not isinstance(raw, list) or len(raw) != 2:
            raise QuantityError(
                f"expected two temperatures such as ['18 degC', '28 degC'], found {raw!r}"
            )
        low, high = (parse_quantity(v, "degC") for v in raw)
    except QuantityError as exc:
        section.problem(name, str(exc))
        return None
    if not low < high:
        section.problem(name, f"expected the lower temperature first, found {raw!r}")
        return None
    return low, high


def parse_unit(doc: TomlDoc) -> UnitModel:
    root = doc.root
    head = root.table("unit", required=True)
    name = description = ""
    fixture_text = None
    fixture_path = doc.path
    if head:
        name = head.string("name") or ""
        description = head.string("description", "")
        named = head.named_file("fixture", "the fixture map the unit sits on")
        if named is not None:
            fixture_text, fixture_path = named
        head.reject_unknown()
    unit = UnitModel(
        name=name,
        path=doc.path,
        fixture_path=fixture_path,
        description=description,
        fixture_written=fixture_text or "",
        source=doc,
    )

    ambient = root.table("ambient")
    if ambient:
        unit.ambient_c = ambient.quantity("temperature", "degC", 23.0)
        if not _in_ambient_span(ambient, "temperature", unit.ambient_c):
            unit.ambient_c = 23.0
        unit.pressure_pa = ambient.quantity("pressure", "Pa", 101_325.0, positive=True)
        unit.ambient_range_c = _temperature_range(ambient, "temperature_range")
        if unit.ambient_range_c and not _in_ambient_span(
            ambient, "temperature_range", *unit.ambient_range_c
        ):
            unit.ambient_range_c = None
        elif unit.ambient_range_c and not (
            unit.ambient_range_c[0] <= unit.ambient_c <= unit.ambient_range_c[1]
        ):
            ambient.problem(
                "temperature_range",
                f"the temperature ({unit.ambient_c:g} degC) must lie inside temperature_range",
            )
        ambient.reject_unknown()

    controller = root.table("controller")
    if controller:
        unit.controller = Controller(ground=controller.string("ground") or "?")
        for src_name, src in controller.named_tables("sources"):
            unit.controller.sources.append(
                Source(
                    name=src_name,
                    node=src.string("node") or "?",
                    volts=src.quantity("voltage", "V") or 0.0,
                    tolerance_pct=_percent(src, "tolerance"),
                )
            )
            src.reject_unknown()
        controller.reject_unknown()

    for wire_name, sec in root.named_tables("wires"):
        a, b = _between(sec)
        gauge = sec.string("gauge") or ""
        area = 0.0
        if gauge:
            try:
                area = area_from_gauge(gauge)
            except ValueError as exc:
                sec.problem("gauge", str(exc))
        length = sec.quantity("length", "m", positive=True) or 0.0
        unit.wires[wire_name] = Wire(
            wire_name,
            a,
            b,
            area,
            length,
            gauge,
            length_tolerance_pct=_percent(sec, "length_tolerance"),
            area_tolerance_pct=_percent(sec, "area_tolerance"),
        )
        sec.reject_unknown()

    for res_name, sec in root.named_tables("resistors"):
        a, b = _between(sec)
        value = sec.quantity("value", "ohm", positive=True) or 1.0
        unit.resistors[res_name] = Resistor(res_name, a, b, value, _percent(sec, "tolerance"))
        sec.reject_unknown()

    for cap_name, sec in root.named_tables("capacitors"):
        a, b = _between(sec)
        value = sec.quantity("value", "F", positive=True) or 0.0
        unit.capacitors[cap_name] = Capacitor(cap_name, a, b, value)
        sec.reject_unknown()

    for sensor_name, sec in root.named_tables("sensors"):
        sensor = _parse_sensor(sensor_name, sec)
        if sensor is None:  # its kind is wrong or missing (reported): which keys it takes is not
            continue  # known, so they are left to be judged once the kind is mended
        unit.sensors[sensor_name] = sensor
        sec.reject_unknown()

    probe = root.table("reference_probe")
    if probe:
        unit.probe = ReferenceProbe(
            force_hi=probe.string("force_hi") or "?",
            sense_hi=probe.string("sense_hi") or "?",
            force_lo=probe.string("force_lo") or "?",
            sense_lo=probe.string("sense_lo") or "?",
            r0_ohm=probe.quantity("r0", "ohm", 100.0, positive=True),
            lead_ohm=probe.quantity("lead_resistance", "ohm", 0.1, positive=True),
            tolerance_class=probe.string("tolerance_class", None, choices=PROBE_CLASSES),
        )
        probe.reject_unknown()

    _check_names_unique(root)
    root.reject_unknown()
    return unit


def _parse_sensor(name: str, sec: Section) -> Sensor | None:
    kind = sec.string("kind", choices=SENSOR_KINDS)
    if kind == "ntc":  # only thermometers' values depend on their own temperature
        temperature = _temperature(sec)
        a, b = _between(sec)
        if sec.has("steinhart_hart"):
            model = read_steinhart_hart(sec)
            return NtcSensor(
                name,
                a,
                b,
                sh_coefficients=None if model is None else (model.a, model.b, model.c),
                temp_c=temperature,
            )
        return NtcSensor(
            name,
            a,
            b,
            r25_ohm=sec.quantity("r25", "ohm", positive=True),
            beta_k=sec.quantity("beta", "K", positive=True),
            temp_c=temperature,
            r25_tolerance_pct=_percent(sec, "r25_tolerance"),
            beta_tolerance_pct=_percent(sec, "beta_tolerance"),
        )
    if kind == "rtd":
        a, b = _between(sec)
        temp = _temperature(sec)
        if temp is not None and not T_MIN_C <= temp <= T_MAX_C:
            sec.problem(
                "temperature",
                f"expected a temperature on the RTD's curve, {T_MIN_C:g} to {T_MAX_C:g} degC "
                f"(IEC 60751), found {sec.raw('temperature')!r}",
            )
        return RtdSensor(
            name,
            a,
            b,
            r0_ohm=sec.quantity("r0", "ohm", 100.0, positive=True),
            temp_c=temp,
            tolerance_class=sec.string("tolerance_class", None, choices=PROBE_CLASSES),
        )
    if kind == "ratiometric":
        transfer = read_ratiometric(sec) or Ratiometric(0.0, 1.0)  # the default: problems stop it
        return RatiometricSensor(
            name,
            supply=sec.string("supply") or "?",
            output=sec.string("output") or "?",
            ground=sec.string("ground") or "?",
            p_low_pa=transfer.p_min,
            p_high_pa=transfer.p_max,
            fraction_low=transfer.frac_min,
            fraction_high=transfer.frac_max,
            pressure_pa=sec.quantity("pressure", "Pa", None),
            quiescent_a=sec.quantity("quiescent_current", "A", 0.005, positive=True),
            r_out_ohm=sec.quantity("output_resistance", "ohm", 100.0, positive=True),
            fraction_tolerance_pct=_percent(sec, "fraction_tolerance"),
        )
    if kind == "potentiometer":
        a, b = _between(sec)
        position = sec.number("position", 0.5)
        if position is not None and not 0.0 <= position <= 1.0:
            sec.problem("position", f"expected a number from 0 to 1, found {position}")
        return Potentiometer(
            name,
            a,
            b,
            wiper=sec.string("wiper") or "?",
            r_ohm=sec.quantity("value", "ohm", positive=True) or 1.0,
            position=min(max(position or 0.5, 0.0), 1.0),
        )
    if kind == "switch":
        a, b = _between(sec)
        return SwitchSensor(
            name,
            a,
            b,
            closed=sec.boolean("closed", True),
            r_on_ohm=sec.quantity("on_resistance", "ohm", 0.05, positive=True),
        )
    return None


def _temperature(sec: Section) -> float | None:
    """``temperature = "ambient"`` (default) or a value in degC."""
    if sec.raw("temperature") in (None, "ambient"):
        return None
    return above_absolute_zero(sec, "temperature", sec.quantity("temperature", "degC"))


def _check_names_unique(root: Section) -> None:
    """Part names are unique across the groups.  The names are those the file gives, whether or
    not the part could be read: a sensor of an unknown kind still takes its name."""
    seen: dict[str, str] = {}
    for group in _PART_GROUPS:
        tables = root.data.get(group)
        if not isinstance(tables, dict):  # reported where the group is read
            continue
        for part, value in tables.items():
            if not isinstance(value, dict):  # reported where the group is read: not a part
                continue
            if part in seen:
                root.problem(
                    group,
                    f"part name {part!r} is also used in [{seen[part]}]; names must be unique",
                )
            seen[part] = group
