"""The station file: which instruments this bench has, where they are, and how good they are.

A station names its fixture map, its DMM, supply and relay box (driver name from the ``rig.drivers``
entry points, VISA resource or serial port, settings, calibration due date), the DMM's accuracy as
its data sheet states it (per function and range, % of reading + % of range, or ppm), the mains
frequency, whether every run must name its operator, and the reference thermometer's identity,
calibration due date and accuracy.  See ``docs/station-file.md``.
"""

from __future__ import annotations

import datetime as dt
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from drivers.registry import load_driver
from rig.config.calibration import read_calibration
from rig.config.fixture import FixtureMap, parse_fixture
from rig.config.probe_section import parse_reference_probe
from rig.config.reader import Section, TomlDoc, named_unreadable
from rig.config.store_section import StoreSettings, parse_store
from rig.config.text_file import FileUnreadable
from rig.errors import ConfigError, RigError
from rig.judge.accuracy import AccuracySpec, AccuracyTable
from rig.judge.reference_probe import ReferenceProbe
from rig.quantity import format_quantity

FUNCTIONS = {"dcv": "V", "res2w": "ohm", "res4w": "ohm", "dci": "A"}
ROLES = ("dmm", "supply", "relay_box")


@dataclass
class InstrumentConfig:
    role: str
    driver: str
    resource: str
    settings: dict[str, Any] = field(default_factory=dict)
    calibration_due: dt.date | None = None
    allow_past_due: bool = False
    expect_identity: str = ""
    """Text the instrument's identity must contain, letter case aside (its serial, say); empty:
    not stated."""


@dataclass(frozen=True)
class SupplyCaps:
    """What a station lets a step program into its supply: the supply's own ratings, or less
    where the fixture's wiring or the units tested call for less (None: no cap stated)."""

    max_voltage: float | None
    max_current: float | None


@dataclass
class Station:
    name: str
    path: Path
    fixture: FixtureMap
    instruments: dict[str, InstrumentConfig]
    dmm_accuracy: AccuracyTable
    supply_accuracy: dict[str, tuple[float, AccuracySpec]]
    line_hz: float = 50.0
    data_dir: Path = Path("rig-data")
    lead_zero_ohm: dict[str, float] = field(default_factory=dict)
    """Fixture lead resistance per pin pair ("A:B"), subtracted from resistance readings."""
    watchdog_s: float = 2.0
    supply_caps: SupplyCaps = field(default_factory=lambda: SupplyCaps(None, None))
    """The most a step may program into the supply (``max_voltage``, ``max_current``)."""
    store: StoreSettings = field(default_factory=StoreSettings)
    """Where results go besides the station's own file (``[store]``, docs/postgresql.md)."""
    operator_required: bool = False
    """A run is refused without an operator's name, for a shop that must record who tested."""
    reference_probe: ReferenceProbe | None = None
    """The thermometer reference-temperature steps read (``[reference_probe]``); None: not
    stated, and those steps carry the meter's uncertainty alone."""

    @property
    def store_path(self) -> Path:
        return self.data_dir / "results.sqlite"


def load_station(path: Path | str) -> Station:
    """Read and validate a station file and its fixture map; lists every problem of both."""
    doc = TomlDoc(Path(path), kind="a station file (.toml)")
    root = doc.root
    head = root.table("station", required=True)
    name = "station"
    line_hz = 50.0
    data_dir = doc.path.parent / "rig-data"
    fixture: FixtureMap | None = None
    fixture_problems: list[Any] = []
    watchdog_s = 2.0
    operator_required = False
    if head:
        name = head.string("name") or "station"
        line_hz = head.quantity("line_frequency", "Hz", 50.0, positive=True)
        if line_hz not in (50.0, 60.0):
            head.problem("line_frequency", f"expected 50 Hz or 60 Hz, found {line_hz:g} Hz")
        data_text = head.string("data_dir", "rig-data")
        data_dir = (doc.path.parent / data_text).resolve()
        watchdog_s = head.quantity("watchdog", "s", 2.0, positive=True)
        operator_required = head.boolean("operator_required", False)
        named = head.named_file("fixture", "the station's fixture map")
        if named is not None:
            fixture_text, fixture_path = named
            try:
                fixture_doc = TomlDoc(fixture_path, kind="a fixture file (.toml)")
                fixture = parse_fixture(fixture_doc)
                fixture_problems = fixture_doc.problems
            except FileUnreadable as exc:  # the key that names it is what to fix
                head.problem("fixture", named_unreadable(fixture_text, exc))
            except ConfigError as exc:
                fixture_problems = exc.problems
        head.reject_unknown()

    instruments: dict[str, InstrumentConfig] = {}
    accuracy = AccuracyTable({})
    supply_accuracy: dict[str, tuple[float, AccuracySpec]] = {}
    supply_caps = SupplyCaps(None, None)
    for role in ROLES:
        sec = root.table(role, required=True)
        if sec is None:
            continue
        instruments[role] = _instrument(role, sec)
        if role == "dmm":
            accuracy = _accuracy_table(sec)
        if role == "supply":
            supply_accuracy = _supply_accuracy(sec)
            supply_caps = SupplyCaps(
                sec.quantity("max_voltage", "V", None, positive=True),
                sec.quantity("max_current", "A", None, positive=True),
            )
        sec.reject_unknown()

    zeros: dict[str, float] = {}
    zero_sec = root.table("lead_zero")
    if zero_sec:
        for pair in list(zero_sec.data):
            value = zero_sec.quantity(pair, "ohm")
            problem = _pair_problem(pair, fixture)
            if problem:  # a pair no step can name would never be subtracted, silently
                zero_sec.problem(pair, problem)
            elif value is not None:
                zeros[pair] = value
        zero_sec.reject_unknown()
    store = parse_store(root.table("store"))
    probe = parse_reference_probe(root.table("reference_probe"))
    root.reject_unknown()

    problems = doc.problems + fixture_problems
    if problems:
        raise ConfigError(problems)
    assert fixture is not None
    return Station(
        name=name,
        path=doc.path,
        fixture=fixture,
        instruments=instruments,
        dmm_accuracy=accuracy,
        supply_accuracy=supply_accuracy,
        line_hz=line_hz,
        data_dir=data_dir,
        lead_zero_ohm=zeros,
        watchdog_s=watchdog_s,
        supply_caps=supply_caps,
        store=store,
        operator_required=operator_required,
        reference_probe=probe,
    )


def _pair_problem(pair: str, fixture: FixtureMap | None) -> str:
    """Why a ``[lead_zero]`` key names no pair of the fixture's pins (empty when it does)."""
    pins = pair.split(":")
    if len(pins) != 2 or not all(p.strip() for p in pins):
        return 'expected a pin pair such as "S_SIG:S_RET"'
    if fixture is None:  # the fixture's own problems are listed
        return ""
    unknown = [p for p in pins if p not in fixture.pins]
    if unknown:
        return (
            f"pin {', '.join(repr(p) for p in unknown)} is not in fixture {fixture.name!r} "
            f"({fixture.path.name})"
        )
    return ""


def _instrument(role: str, sec: Section) -> InstrumentConfig:
    driver = sec.string("driver") or ""
    resource = sec.string("resource") or ""
    due, allow_past_due = read_calibration(sec)
    expect: str = sec.string("expect_identity", "")
    if sec.has("expect_identity") and not expect.strip():
        sec.problem("expect_identity", "expected text the identity contains, such as a serial")
    settings_sec = sec.table("settings")
    settings = dict(settings_sec.data) if settings_sec else {}
    if driver:
        _check_driver(sec, driver, resource, settings)
    return InstrumentConfig(
        role=role,
        driver=driver,
        resource=resource,
        settings=settings,
        calibration_due=due,
        allow_past_due=allow_past_due,
        expect_identity=expect.strip(),
    )


def _check_driver(sec: Section, driver: str, resource: str, settings: dict[str, Any]) -> None:
    """The driver exists and takes this resource and these settings: found when the file loads
    (``rig check``), not first at a run with no file or line named."""
    try:
        cls = load_driver(driver)
    except RigError as exc:
        sec.problem("driver", str(exc))
        return
    for key, message in cls.setting_problems(resource, settings):
        sec.problem(key, message)


def _spec(entry: Section) -> AccuracySpec:
    if entry.has("ppm_reading") or entry.has("ppm_range"):
        return AccuracySpec.from_ppm(
            entry.number("ppm_reading", 0.0, minimum=0), entry.number("ppm_range", 0.0, minimum=0)
        )
    return AccuracySpec(
        entry.number("pct_reading", 0.0, minimum=0), entry.number("pct_range", 0.0, minimum=0)
    )


def _accuracy_table(sec: Section) -> AccuracyTable:
    table = sec.table("accuracy", required=True)
    entries: dict[str, list[tuple[float, AccuracySpec]]] = {}
    if table is None:
        return AccuracyTable({})
    for function, unit in FUNCTIONS.items():
        rows: list[tuple[float, AccuracySpec]] = []
        for entry in table.table_list(function):
            upper = entry.quantity("range", unit, positive=True)
            spec = _spec(entry)
            entry.reject_unknown()
            if upper is not None and any(math.isclose(upper, u) for u, _ in rows):
                shown = format_quantity(upper, unit)
                entry.problem("range", f"the {shown} range is listed twice; give each range once")
            elif upper is not None:
                rows.append((upper, spec))
        if not rows:
            table.problem(function, f"missing; expected [[dmm.accuracy.{function}]] rows")
        else:
            entries[function] = rows
    table.reject_unknown()
    try:
        return AccuracyTable(entries)
    except ValueError as exc:
        table.problem("", str(exc))
        return AccuracyTable({})


SUPPLY_ACCURACY = {"voltage": "V", "current": "A", "setting": "V"}
"""The supply's accuracy tables: its voltage and current readback, and how far its output may be
from the voltage it is set to (``setting``, the programming accuracy)."""


def _supply_accuracy(sec: Section) -> dict[str, tuple[float, AccuracySpec]]:
    """The supply's accuracy tables (``SUPPLY_ACCURACY``), each (range, spec)."""
    table = sec.table("accuracy")
    found: dict[str, tuple[float, AccuracySpec]] = {}
    if table is None:
        return found
    for what, unit in SUPPLY_ACCURACY.items():
        entry = table.table(what)
        if entry:
            upper = entry.quantity("range", unit, positive=True) or 1.0
            found[what] = (upper, _spec(entry))
            entry.reject_unknown()
    table.reject_unknown()
    return found
