"""The data-file loaders: every shipped file loads, and every broken file is a ``ConfigError``
whose problems say which file, which key, which line (where the reader can find it), and what was
expected against what was found.

Broken files are the shipped files with one deliberate change (``mutate`` checks that the change
really happened, so a test cannot pass on an unchanged file) or small files written here.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
from offline_station import offline_station_text

from rig.config.fixture import Bus, load_fixture
from rig.config.sequence import load_sequence
from rig.config.station import Station, load_station
from rig.config.unit_file import NtcSensor, RatiometricSensor, load_unit
from rig.errors import ConfigError, Problem
from rig.plan import build_plan
from rig.quantity import format_quantity

ROOT = Path(__file__).resolve().parent.parent
SEQUENCES = ROOT / "sequences"
FIXTURE = SEQUENCES / "demo-fixture.toml"
UNITS = sorted((SEQUENCES / "units").glob("*.toml"))
SEQUENCE_FILES = sorted(p for p in SEQUENCES.glob("*.toml") if p != FIXTURE)
TEMP_UNIT = SEQUENCES / "units" / "temp-circuit.toml"


# ---- helpers -----------------------------------------------------------------------------------


def mutate(text: str, old: str, new: str) -> str:
    """``text`` with the single occurrence of ``old`` replaced by ``new``."""
    assert text.count(old) == 1, f"{old!r} must occur exactly once in the base file"
    return text.replace(old, new)


def line_of(text: str, fragment: str) -> int:
    """1-based line of the single line of ``text`` that contains ``fragment``."""
    hits = [n for n, line in enumerate(text.splitlines(), start=1) if fragment in line]
    assert len(hits) == 1, f"{fragment!r} is on lines {hits}, expected exactly one"
    return hits[0]


def problems_of(loader: Callable[[Path], Any], path: Path) -> list[Problem]:
    with pytest.raises(ConfigError) as caught:
        loader(path)
    problems = caught.value.problems
    assert problems, "a ConfigError must carry at least one problem"
    text = str(caught.value)
    for problem in problems:
        assert problem.file == str(path)
        assert str(problem) in text  # the error's message lists every problem
    return problems


def only(problems: list[Problem], key: str) -> Problem:
    found = [p for p in problems if p.key == key]
    assert len(found) == 1, f"expected one problem at {key!r}, found {problems}"
    return found[0]


def write(tmp_path: Path, name: str, text: str) -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def station_file(tmp_path: Path, fixture: Path = FIXTURE) -> Path:
    """A station modelled on the virtual bench's template, with resources nobody opens."""
    text = offline_station_text("loader-test", fixture, tmp_path / "rig-data")
    return write(tmp_path, "station.toml", text)


@pytest.fixture
def station(tmp_path: Path) -> Station:
    return load_station(station_file(tmp_path))


SEQUENCE_HEAD = '[sequence]\nname = "broken"\n'


def volts_step(step_id: str, hi: str = "S_SIG", lo: str = "S_GND") -> str:
    return (
        f'\n[[steps]]\nid = "{step_id}"\nkind = "volts"\nhi = "{hi}"\nlo = "{lo}"\n'
        'low = "0.6 V"\nhigh = "4.8 V"\n'
    )


PT_STEP = """
[[steps]]
id = "ambient"
kind = "reference-temperature"
force_hi = "PT_FH"
sense_hi = "PT_SH"
force_lo = "PT_FL"
sense_lo = "PT_SL"
"""

NTC_STEP = """
[[steps]]
id = "curve"
kind = "ntc"
hi = "T1"
lo = "T2"
r25 = "2.0 kohm"
beta = "3450 K"
temperature_from = "{source}"
tolerance = "5 %"
"""


# ---- every shipped file loads ------------------------------------------------------------------


def test_shipped_fixture_loads() -> None:
    fixture = load_fixture(FIXTURE)
    assert fixture.name == "demo-fixture"
    assert (fixture.relay_count, fixture.max_closed) == (48, 6)
    # read against the file: [pins.S_SIG] dmm_hi = 9, dmm_lo = 10; CHASSIS is the bench ground
    assert fixture.relay_for("S_SIG", Bus.DMM_HI) == 9
    assert fixture.relay_for("S_SIG", Bus.DMM_LO) == 10
    assert [p.name for p in fixture.pins.values() if p.bench_ground] == ["CHASSIS"]
    owners = fixture.relay_owner()
    assert len(owners) == sum(len(p.relays) for p in fixture.pins.values())  # no relay reused


@pytest.mark.parametrize("path", UNITS, ids=lambda p: p.stem)
def test_shipped_unit_loads(path: Path) -> None:
    unit = load_unit(path)
    assert unit.name == path.stem
    assert unit.fixture_path == FIXTURE.resolve()
    assert unit.wires and unit.sensors
    fixture = load_fixture(unit.fixture_path)
    assert unit.nodes() & set(fixture.pins), "a unit must touch the fixture somewhere"


def test_shipped_temp_unit_values() -> None:
    unit = load_unit(TEMP_UNIT)
    assert unit.resistors["pullup"].r_ohm == pytest.approx(2490.0)  # "2.49 kohm"
    assert unit.resistors["ground_strap"].r_ohm == pytest.approx(5e-3)  # "5 mohm"
    assert unit.wires["ground"].length_m == pytest.approx(1.6)
    assert unit.capacitors["input_filter"].c_farad == pytest.approx(100e-9)
    coolant = unit.sensors["coolant"]
    assert isinstance(coolant, NtcSensor)
    assert (coolant.r25_ohm, coolant.beta_k) == (pytest.approx(2000.0), pytest.approx(3450.0))
    assert unit.controller is not None
    feed = unit.controller.source("feed")
    assert feed is not None
    assert (feed.node, feed.volts) == ("FEED12", pytest.approx(12.0))


def test_shipped_pressure_unit_values() -> None:
    unit = load_unit(SEQUENCES / "units" / "pressure-circuit.toml")
    sensor = unit.sensors["map"]
    assert isinstance(sensor, RatiometricSensor)
    assert (sensor.p_low_pa, sensor.p_high_pa) == (0.0, pytest.approx(500e3))
    assert sensor.quiescent_a == pytest.approx(8e-3)
    assert unit.pressure_pa == pytest.approx(101.3e3)


@pytest.mark.parametrize("path", SEQUENCE_FILES, ids=lambda p: p.stem)
def test_shipped_sequence_loads_and_plans(path: Path, station: Station) -> None:
    sequence = load_sequence(path)
    assert sequence.name == path.stem
    assert sequence.steps
    ids = [s.id for s in sequence.steps]
    assert len(ids) == len(set(ids))
    plan = build_plan(sequence, station)
    assert sorted(p.spec.id for p in plan.steps) == sorted(ids)


def test_station_template_loads(station: Station) -> None:
    assert station.fixture.name == "demo-fixture"
    assert set(station.instruments) == {"dmm", "supply", "relay_box"}
    assert station.instruments["relay_box"].resource == "/dev/null"
    assert station.line_hz == 50.0


# ---- broken files ------------------------------------------------------------------------------


def test_toml_syntax_error_names_the_line(tmp_path: Path) -> None:
    base = TEMP_UNIT.read_text(encoding="utf-8")
    text = mutate(base, 'value = "2.49 kohm"', 'value = "2.49 kohm')  # unterminated string
    path = write(tmp_path, "unit.toml", text)
    (problem,) = problems_of(load_unit, path)
    assert "not valid TOML" in problem.message
    assert problem.line == line_of(text, 'value = "2.49 kohm')


def test_unknown_key_is_a_typo_not_ignored(tmp_path: Path) -> None:
    base = TEMP_UNIT.read_text(encoding="utf-8")
    text = mutate(base, 'gauge = "18 AWG"', 'guage = "18 AWG"')
    path = write(tmp_path, "unit.toml", text)
    problems = problems_of(load_unit, path)
    typo = only(problems, "wires.ground.guage")
    assert typo.message.startswith("unknown key")
    assert "gauge" in typo.message  # the key that was meant is among those offered
    assert typo.line == line_of(text, "guage")


def _shipped_text(loader: Callable[[Path], Any], tmp_path: Path) -> str:
    """The text of a shipped file ``loader`` reads (the station: the offline one)."""
    if loader is load_station:
        return station_file(tmp_path).read_text(encoding="utf-8")
    shipped = {load_unit: TEMP_UNIT, load_fixture: FIXTURE}
    return shipped.get(loader, SEQUENCES / "temp-circuit-check.toml").read_text(encoding="utf-8")


# A misspelling of an optional key in each kind of file: the line as shipped, the key misspelt,
# and the table it is in.  Which key a typo is taken for follows difflib's ratio (Python standard
# library) at 0.75 or more; offering the one close key is common practice for linters and
# compilers, no published source.
MISSPELT_OPTIONAL = [
    pytest.param(load_unit, 'r25_tolerance = "2 %"', "r25_tolerence", "sensors.coolant", id="unit"),
    pytest.param(load_fixture, "rated_operations = ", "rated_operatons", "fixture", id="fixture"),
    pytest.param(load_sequence, 'title = "Sensor ground to', "titel", "steps[4]", id="sequence"),
    pytest.param(load_station, 'watchdog = "2 s"', "wachdog", "station", id="station"),
]


@pytest.mark.parametrize(("loader", "line", "typo", "table"), MISSPELT_OPTIONAL)
def test_a_misspelt_optional_key_names_the_key_meant(
    tmp_path: Path, loader: Callable[[Path], Any], line: str, typo: str, table: str
) -> None:
    meant = line.split(" =")[0]
    text = mutate(_shipped_text(loader, tmp_path), line, line.replace(meant, typo, 1))
    path = write(tmp_path, "broken.toml", text)
    (problem,) = problems_of(loader, path)  # the default stands in: nothing else is wrong
    assert problem.key == f"{table}.{typo}"
    assert problem.message.startswith(f"unknown key; did you mean {meant!r}? Expected one of: ")
    assert problem.line == line_of(text, typo)


def test_wrong_type(tmp_path: Path) -> None:
    base = FIXTURE.read_text(encoding="utf-8")
    text = mutate(base, "relay_count = 48", 'relay_count = "48"')
    path = write(tmp_path, "fixture.toml", text)
    problem = only(problems_of(load_fixture, path), "fixture.relay_count")
    assert "expected a whole number" in problem.message
    assert "'48'" in problem.message
    assert problem.line == line_of(text, "relay_count")


def test_missing_required_key(tmp_path: Path) -> None:
    base = FIXTURE.read_text(encoding="utf-8")
    text = mutate(base, "max_closed = 6\n", "")
    path = write(tmp_path, "fixture.toml", text)
    problem = only(problems_of(load_fixture, path), "fixture.max_closed")
    assert problem.message.startswith("missing")
    assert "whole number" in problem.message


def test_bad_unit_says_expected_and_found(tmp_path: Path) -> None:
    base = TEMP_UNIT.read_text(encoding="utf-8")
    text = mutate(base, 'value = "2.49 kohm"', 'value = "2.2 kV"')
    path = write(tmp_path, "unit.toml", text)
    problem = only(problems_of(load_unit, path), "resistors.pullup.value")
    assert "ohm" in problem.message
    assert "'2.2 kV'" in problem.message
    assert "in V" in problem.message  # what was found
    assert problem.line == line_of(text, "2.2 kV")


def test_unit_without_unit(tmp_path: Path) -> None:
    base = TEMP_UNIT.read_text(encoding="utf-8")
    text = mutate(base, 'length = "1.6 m"\n\n[sensors', "length = 1.6\n\n[sensors")
    path = write(tmp_path, "unit.toml", text)
    problem = only(problems_of(load_unit, path), "wires.ground.length")
    assert "1.6" in problem.message
    assert "m" in problem.message


def test_relay_out_of_range(tmp_path: Path) -> None:
    base = FIXTURE.read_text(encoding="utf-8")
    text = mutate(base, "dmm_hi = 31", "dmm_hi = 49")
    path = write(tmp_path, "fixture.toml", text)
    problem = only(problems_of(load_fixture, path), "pins.CHASSIS.dmm_hi")
    assert "relay 49" in problem.message
    assert "1..48" in problem.message
    assert problem.line == line_of(text, "dmm_hi = 49")


def test_relay_used_twice(tmp_path: Path) -> None:
    base = FIXTURE.read_text(encoding="utf-8")
    text = mutate(base, "dmm_lo = 32", "dmm_lo = 9")  # 9 is S_SIG's dmm_hi
    path = write(tmp_path, "fixture.toml", text)
    problem = only(problems_of(load_fixture, path), "pins.CHASSIS.dmm_lo")
    assert "relay 9" in problem.message
    assert "pins.S_SIG.dmm_hi" in problem.message
    assert problem.line == line_of(text, "dmm_lo = 9")


def test_unknown_step_kind(tmp_path: Path) -> None:
    text = SEQUENCE_HEAD + volts_step("first").replace('kind = "volts"', 'kind = "voltz"')
    path = write(tmp_path, "seq.toml", text)
    problem = only(problems_of(load_sequence, path), "steps[0].kind")
    assert "'voltz'" in problem.message
    assert "'volts'" in problem.message  # the kinds there are, among them the one meant
    assert problem.line == line_of(text, "voltz")


def test_a_sensor_of_unknown_kind_still_has_its_name_checked(tmp_path: Path) -> None:
    # two mistakes in one table: a kind rig does not know, and the name of a wire
    base = TEMP_UNIT.read_text(encoding="utf-8")
    text = mutate(base, '[sensors.coolant]\nkind = "ntc"', '[sensors.ground]\nkind = "thermistor"')
    path = write(tmp_path, "unit.toml", text)
    problems = problems_of(load_unit, path)
    assert [p.key for p in problems] == ["sensors.ground.kind", "sensors"]  # not its other keys
    kind, clash = problems
    assert "'thermistor'" in kind.message and "'ntc'" in kind.message
    assert kind.line == line_of(text, "thermistor")
    assert clash.message == "part name 'ground' is also used in [wires]; names must be unique"
    assert clash.line == line_of(text, "[sensors.ground]")


def test_duplicate_step_id(tmp_path: Path) -> None:
    text = SEQUENCE_HEAD + volts_step("signal") + volts_step("signal", hi="C_SIG", lo="C_GND")
    path = write(tmp_path, "seq.toml", text)
    problem = only(problems_of(load_sequence, path), "steps[1].id")
    assert "'signal'" in problem.message
    assert "twice" in problem.message


def test_duplicate_step_id_names_the_line_of_the_second_step(tmp_path: Path) -> None:
    text = SEQUENCE_HEAD + volts_step("signal") + volts_step("signal", hi="C_SIG", lo="C_GND")
    path = write(tmp_path, "seq.toml", text)
    problem = only(problems_of(load_sequence, path), "steps[1].id")
    second_id_line = [n for n, line in enumerate(text.splitlines(), 1) if "signal" in line][1]
    assert problem.line == second_id_line


def test_line_of_a_pin_whose_name_ends_another_pins_name(tmp_path: Path) -> None:
    text = (
        '[fixture]\nname = "f"\nrelay_count = 8\nmax_closed = 4\n\n'
        "[pins.AB]\ndmm_hi = 1\n\n[pins.B]\ndmm_hi = 99\n"
    )
    path = write(tmp_path, "fixture.toml", text)
    problem = only(problems_of(load_fixture, path), "pins.B.dmm_hi")
    assert "relay 99" in problem.message
    assert problem.line == line_of(text, "dmm_hi = 99")


@pytest.mark.parametrize(
    ("steps", "index"),
    [
        (NTC_STEP.format(source="ambient") + PT_STEP, 0),  # names a later step
        (PT_STEP + NTC_STEP.format(source="well"), 1),  # names no step at all
        (NTC_STEP.format(source="curve") + PT_STEP, 0),  # names itself
    ],
    ids=["later", "missing", "itself"],
)
def test_temperature_from_must_name_an_earlier_step(tmp_path: Path, steps: str, index: int) -> None:
    path = write(tmp_path, "seq.toml", SEQUENCE_HEAD + steps)
    problem = only(problems_of(load_sequence, path), f"steps[{index}].temperature_from")
    assert "not an earlier step" in problem.message
    assert problem.line == line_of(SEQUENCE_HEAD + steps, "temperature_from")


def test_temperature_from_an_earlier_step_is_accepted(tmp_path: Path) -> None:
    path = write(tmp_path, "seq.toml", SEQUENCE_HEAD + PT_STEP + NTC_STEP.format(source="ambient"))
    sequence = load_sequence(path)
    assert sequence.step("curve").depends_on == ("ambient",)


WIRE_DROP_STEP = """
[[steps]]
id = "drop"
kind = "wire-drop"
from = "S_SIG"
to = "C_SIG"
reference = "S_GND"
max = "10 mV"
"""

DIVIDER_STEP = """
[[steps]]
id = "divider"
kind = "ntc"
hi = "C_SIG"
lo = "C_GND"
measure = "voltage"
r25 = "10 kohm"
beta = "3977 K"
temperature = "25 degC"
pullup = "4.7 kohm"
reference_from = "{source}"
tolerance = "3 %"
"""


# A value in V is not a value in degC, and a voltage drop along a wire is not the level of a
# reference (quantities of different kinds: SI Brochure, 9th edition, BIPM 2019, 2.3.3); taken
# as one, the step is judged at the wrong temperature or reference.
@pytest.mark.parametrize(
    ("steps", "key", "found"),
    [
        (
            volts_step("ref") + NTC_STEP.format(source="ref"),
            "steps[1].temperature_from",
            "'ref', a step of kind volts, which gives a voltage in V",
        ),
        (
            PT_STEP
            + NTC_STEP.format(source="ambient")
            + NTC_STEP.replace('"curve"', '"again"').format(source="curve"),
            "steps[2].temperature_from",
            "'curve', a step of kind ntc, whose value (unit: ohm) no other step can take",
        ),
        (
            volts_step("ref") + WIRE_DROP_STEP + DIVIDER_STEP.format(source="drop"),
            "steps[2].reference_from",
            "'drop', a step of kind wire-drop, which gives a voltage drop, not a level",
        ),
        (
            PT_STEP + DIVIDER_STEP.format(source="ambient"),
            "steps[1].reference_from",
            "'ambient', a step of kind reference-temperature, which gives a temperature in degC",
        ),
    ],
    ids=["temperature-from-volts", "temperature-from-ntc", "reference-from-drop", "reference-degc"],
)
def test_an_input_from_a_step_of_the_wrong_kind_is_refused(
    tmp_path: Path, steps: str, key: str, found: str
) -> None:
    text = SEQUENCE_HEAD + steps
    path = write(tmp_path, "seq.toml", text)
    problem = only(problems_of(load_sequence, path), key)
    needed = "temperature in degC (kind reference-temperature)"
    if key.endswith("reference_from"):
        needed = "voltage in V (kind volts)"
    assert f"expected the id of a step that gives a {needed}, found {found}" in problem.message
    written = key.rsplit(".", 1)[1]
    lines = [n for n, line in enumerate(text.splitlines(), 1) if line.startswith(written)]
    assert problem.line == lines[-1]


def test_a_harness_proofs_temperature_from_a_volts_step_is_refused(tmp_path: Path) -> None:
    harness = (
        '\n[[steps]]\nid = "harness"\nkind = "harness-proof"\ncapture_to = "w.csv"\n'
        'temperature_from = "ref"\n'
    )
    path = write(tmp_path, "seq.toml", SEQUENCE_HEAD + volts_step("ref") + harness)
    problem = only(problems_of(load_sequence, path), "steps[1].temperature_from")
    assert "gives a temperature in degC" in problem.message
    assert "'ref', a step of kind volts" in problem.message


def test_a_reference_from_a_volts_step_is_accepted(tmp_path: Path) -> None:
    text = SEQUENCE_HEAD + volts_step("ref") + DIVIDER_STEP.format(source="ref")
    sequence = load_sequence(write(tmp_path, "seq.toml", text))
    assert sequence.step("divider").inputs == {"reference_from": ("ref", "V")}


# The meter's range, its integration time (NPLC) and the settle before a reading belong to a
# step that reads the meter; a decision rule to one judged against an uncertainty (common
# practice, no published source).  On a step without them the key did nothing, silently.
@pytest.mark.parametrize(
    ("step", "key", "says"),
    [
        (
            'kind = "prompt"\ntext = "ok?"\nrange = "10 V"\n',
            "range",
            "a prompt step takes no range: it asks the operator; no meter is read",
        ),
        ('kind = "soak"\nduration = "1 s"\nnplc = 10\n', "nplc", "a soak step takes no nplc"),
        ('kind = "soak"\nduration = "1 s"\nrange = "auto"\n', "range", "takes no range"),
        ('kind = "prompt"\ntext = "ok?"\nsettle = "1 s"\n', "settle", "takes no settle"),
        (
            'kind = "prompt"\ntext = "ok?"\ndecision_rule = "guarded"\n',
            "decision_rule",
            "a prompt step takes no decision_rule: it asks the operator; nothing is measured",
        ),
        (
            'kind = "supply-current"\nmax = "1 A"\nrange = "1 A"\n'
            'supply = { pos = "S_SIG", neg = "S_GND", voltage = "5 V", limit = "0.1 A" }\n',
            "range",
            "a supply-current step takes no range: it reads the supply's own readback",
        ),
    ],
    ids=["prompt-range", "soak-nplc", "soak-range-auto", "prompt-settle", "prompt-rule", "current"],
)
def test_a_key_the_step_kind_has_no_use_for_is_refused(
    tmp_path: Path, step: str, key: str, says: str
) -> None:
    text = SEQUENCE_HEAD + '\n[[steps]]\nid = "a"\n' + step
    path = write(tmp_path, "seq.toml", text)
    problem = only(problems_of(load_sequence, path), f"steps[0].{key}")
    assert says in problem.message
    assert problem.line == line_of(text, f"{key} =")


def test_a_prompts_unknown_key_lists_only_the_keys_it_takes(tmp_path: Path) -> None:
    text = SEQUENCE_HEAD + '\n[[steps]]\nid = "a"\nkind = "prompt"\ntext = "ok?"\ncolour = 1\n'
    problem = only(problems_of(load_sequence, write(tmp_path, "s.toml", text)), "steps[0].colour")
    assert problem.message.endswith("expected one of: declined, id, kind, text, title")


def test_pin_not_in_fixture_is_found_by_the_planner(tmp_path: Path, station: Station) -> None:
    text = SEQUENCE_HEAD + volts_step("first", hi="S_SIGG") + volts_step("second", lo="C_GNDD")
    path = write(tmp_path, "seq.toml", text)
    sequence = load_sequence(path)  # the file itself is well formed
    with pytest.raises(ConfigError) as caught:
        build_plan(sequence, station)
    problems = caught.value.problems
    assert {p.key for p in problems} == {"steps[0].hi", "steps[1].lo"}
    for problem, pin in zip(problems, ("S_SIGG", "C_GNDD"), strict=True):
        assert problem.file == str(path)
        assert repr(pin) in problem.message
        assert "demo-fixture" in problem.message


def test_a_fixed_range_the_meter_does_not_list_is_found_by_the_planner(
    tmp_path: Path, station: Station
) -> None:
    # A range outside the accuracy table would leave the step's readings without an uncertainty,
    # so it must stop at `rig check`, not surface as an unjudged reading mid-run.
    listed = station.dmm_accuracy.ranges("dcv")
    unlisted = 7.0
    assert all(abs(r - unlisted) > 1e-6 for r in listed)
    good = volts_step("held") + f'range = "{listed[-1]:g} V"\n'
    bad = volts_step("odd") + f'range = "{unlisted:g} V"\n'
    path = write(tmp_path, "seq.toml", SEQUENCE_HEAD + good + bad)
    sequence = load_sequence(path)  # the file itself is well formed
    with pytest.raises(ConfigError) as caught:
        build_plan(sequence, station)
    (problem,) = caught.value.problems
    assert (problem.file, problem.key) == (str(path), "steps[1].range")
    assert "7 V" in problem.message and "dcv" in problem.message
    assert all(format_quantity(r, "V") in problem.message for r in listed)


def test_several_problems_reported_together(tmp_path: Path) -> None:
    base = TEMP_UNIT.read_text(encoding="utf-8")
    text = mutate(base, 'value = "2.49 kohm"', 'value = "2.2 kV"')
    text = mutate(text, 'gauge = "18 AWG"', 'guage = "18 AWG"')
    text = mutate(text, 'temperature = "23 degC"', "temperature = 23")
    text = mutate(text, 'r25 = "2.0 kohm"', 'r25 = "-2.0 kohm"')
    path = write(tmp_path, "unit.toml", text)
    problems = problems_of(load_unit, path)
    keys = {p.key for p in problems}
    assert {
        "resistors.pullup.value",
        "wires.ground.guage",
        "ambient.temperature",
        "sensors.coolant.r25",
    } <= keys
    for key, fragment in (
        ("resistors.pullup.value", "2.2 kV"),
        ("wires.ground.guage", "guage"),
        ("ambient.temperature", "temperature = 23"),
        ("sensors.coolant.r25", "-2.0 kohm"),
    ):
        assert only(problems, key).line == line_of(text, fragment), key


def test_several_problems_in_a_sequence(tmp_path: Path) -> None:
    text = (
        SEQUENCE_HEAD.replace('name = "broken"', 'name = "broken"\ndecision_rule = "strict"')
        + volts_step("a").replace('low = "0.6 V"', 'low = "0.6 ohm"')
        + volts_step("a")
        + volts_step("b").replace('kind = "volts"', 'kind = "voltz"')
    )
    path = write(tmp_path, "seq.toml", text)
    keys = {p.key for p in problems_of(load_sequence, path)}
    assert {"sequence.decision_rule", "steps[0].low", "steps[1].id", "steps[2].kind"} <= keys


def test_station_lists_its_fixtures_problems_too(tmp_path: Path) -> None:
    base = FIXTURE.read_text(encoding="utf-8")
    bad_fixture = write(tmp_path, "fixture.toml", mutate(base, "dmm_hi = 31", "dmm_hi = 49"))
    path = station_file(tmp_path, bad_fixture)
    text = path.read_text(encoding="utf-8")
    path.write_text(mutate(text, 'line_frequency = "50 Hz"', 'line_frequency = "55 Hz"'))
    with pytest.raises(ConfigError) as caught:
        load_station(path)
    where = {(p.file, p.key) for p in caught.value.problems}
    assert (str(path), "station.line_frequency") in where
    assert (str(bad_fixture), "pins.CHASSIS.dmm_hi") in where


def test_a_lead_zero_pair_must_name_the_fixtures_pins(tmp_path: Path) -> None:
    # a pair no step can name would never be subtracted: the resistance readings between the
    # pins meant would keep their fixture leads, silently
    path = station_file(tmp_path, FIXTURE)
    text = path.read_text(encoding="utf-8")
    path.write_text(text + '\n[lead_zero]\n"T1:T9" = "0.1 ohm"\n"T1-T2" = "0.1 ohm"\n')
    with pytest.raises(ConfigError) as caught:
        load_station(path)
    found = {p.key: p.message for p in caught.value.problems}
    assert "pin 'T9' is not in fixture" in found["lead_zero.T1:T9"]
    assert "expected a pin pair" in found["lead_zero.T1-T2"]
    path.write_text(text + '\n[lead_zero]\n"T2:T1" = "0.1 ohm"\n')
    assert load_station(path).lead_zero_ohm == {"T2:T1": 0.1}


def test_instrument_tables_are_checked_against_their_driver_when_the_station_loads(
    tmp_path: Path,
) -> None:
    # What a run refused (or ignored) is found by rig check, with file, line and key: a
    # resource pyvisa's parser refuses, an unknown setting, an unknown dialect role, a driver
    # no package provides.
    path = station_file(tmp_path, FIXTURE)
    text = path.read_text(encoding="utf-8")
    text = text.replace("TCPIP::127.0.0.1::1::SOCKET", "TCPIP::127.0.0.1:1::SOCKET", 1)
    text = text.replace('driver = "scpi-supply"', 'driver = "scpi-psu"', 1)
    text = text.replace("[dmm.settings]\n", "[dmm.settings]\ntimeout = 5\n", 1)
    path.write_text(text + '\n[dmm.settings.dialect]\nfetch = "FETC?"\n')
    with pytest.raises(ConfigError) as caught:
        load_station(path)
    found = {p.key: p for p in caught.value.problems}
    assert "not a VISA resource string" in found["dmm.resource"].message
    assert found["dmm.settings.timeout"].message.startswith("unknown setting; known: dialect")
    assert "unknown command role" in found["dmm.settings.dialect.fetch"].message
    assert "unknown driver 'scpi-psu'" in found["supply.driver"].message
    assert all(p.line is not None and p.file == str(path) for p in found.values())


def test_station_with_a_missing_fixture(tmp_path: Path) -> None:
    path = station_file(tmp_path, tmp_path / "no-such-fixture.toml")
    with pytest.raises(ConfigError) as caught:
        load_station(path)
    (problem,) = caught.value.problems
    # put at the key that named it, the fixture's own path in the message
    assert problem.file == str(path) and problem.key == "station.fixture"
    assert problem.line is not None
    assert "no-such-fixture.toml" in problem.message and "not found" in problem.message


@pytest.mark.parametrize("loader", [load_unit, load_fixture, load_sequence, load_station])
def test_missing_file(tmp_path: Path, loader: Callable[[Path], Any]) -> None:
    path = tmp_path / "absent.toml"
    (problem,) = problems_of(loader, path)
    assert "not found" in problem.message
    assert str(path) in str(problem)


@pytest.mark.parametrize("loader", [load_unit, load_fixture, load_sequence, load_station])
def test_file_that_is_not_utf8(tmp_path: Path, loader: Callable[[Path], Any]) -> None:
    path = tmp_path / "latin1.toml"
    path.write_bytes('[unit]\nname = "Kühler"\n'.encode("latin-1"))
    (problem,) = problems_of(loader, path)
    assert "cannot read" in problem.message
    assert "utf-8" in problem.message.lower()


def test_a_directory_is_not_a_file(tmp_path: Path) -> None:
    (problem,) = problems_of(load_unit, tmp_path)
    assert problem.message == "is a folder; expected a unit file (.toml)"
