"""Where a problem points: the line of the key it is about, or, for a key that is not written,
the line of the step's own ``[[steps]]`` header; and one problem per mistake.

The TOML shapes used here (arrays of tables, sub-tables of an array element, inline tables,
multi-line strings, dotted keys) are those the TOML 1.0 spec defines; which line a message should
name is common practice for compilers and linters, no published source.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from offline_station import offline_demo_station

from rig.config.reader import TomlDoc
from rig.config.sequence import load_sequence
from rig.errors import ConfigError, Problem
from rig.plan import build_plan

HEAD = '[sequence]\nname = "lines"\n'
PROMPT = '\n[[steps]]\nid = "connect"\nkind = "prompt"\ntext = "Connect the unit."\n'


def volts(step_id: str | None, *extra: str, low: str | None = '"1.0 V"') -> str:
    """A volts step; ``step_id`` or ``low`` None leaves that key out; ``extra`` lines go after
    the pins."""
    lines = ["", "[[steps]]"]
    if step_id is not None:
        lines.append(f'id = "{step_id}"')
    lines += ['kind = "volts"', 'hi = "C_SIG"', 'lo = "C_GND"', *extra]
    if low is not None:
        lines.append(f"low = {low}")
    return "\n".join(lines) + "\n"


def header_lines(text: str) -> list[int]:
    """1-based lines of the ``[[steps]]`` headers of ``text``."""
    return [n for n, line in enumerate(text.splitlines(), 1) if line.strip() == "[[steps]]"]


def line_with(text: str, fragment: str) -> int:
    hits = [n for n, line in enumerate(text.splitlines(), 1) if fragment in line]
    assert len(hits) == 1, f"{fragment!r} is on lines {hits}"
    return hits[0]


def problems(tmp_path: Path, text: str) -> list[Problem]:
    path = tmp_path / "seq.toml"
    path.write_text(text, encoding="utf-8")
    with pytest.raises(ConfigError) as caught:
        load_sequence(path)
    return caught.value.problems


def test_a_missing_key_points_at_its_own_step_not_the_first(tmp_path: Path) -> None:
    text = HEAD + PROMPT + volts("sig") + volts(None) + volts("late")
    (problem,) = problems(tmp_path, text)
    assert problem.key == "steps[2].id"
    assert problem.line == header_lines(text)[2]


def _doc(text: str) -> TomlDoc:
    return TomlDoc(Path("shapes.toml"), text)


def test_a_key_of_an_inline_table_is_on_that_tables_line() -> None:
    text = (
        HEAD
        + volts("a")
        + volts("b", 'supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "9 A" }')
        + volts("c")
    )
    assert _doc(text).line_of("steps[1].supply.limit") == line_with(text, "supply =")
    assert _doc(text).line_of("steps[2].supply.limit") == header_lines(text)[2]


def test_a_sub_table_of_an_array_element_belongs_to_the_latest_element() -> None:
    text = (
        "[[dmm.accuracy.dcv]]\nrange = '1 V'\n[[dmm.accuracy.dcv]]\nrange = '10 V'\n"
        "[[steps]]\nid = 'a'\n[[steps]]\nid = 'b'\n[steps.supply]\npos = 'P_5V'\n"
    )
    doc = _doc(text)
    assert doc.line_of("dmm.accuracy.dcv[1].range") == line_with(text, "10 V")
    assert doc.line_of("steps[1].supply.pos") == line_with(text, "P_5V")
    assert doc.line_of("steps[0].supply.pos") == header_lines(text)[0]


def test_text_inside_a_multi_line_string_is_not_a_key() -> None:
    text = '[[steps]]\nid = "a"\ntext = """\nlow = "not a key"\n"""\nlow = "1 V"\n'
    assert _doc(text).line_of("steps[0].low") == line_with(text, '"1 V"')


def test_a_dotted_key_and_a_quoted_key_are_found() -> None:
    text = '[station]\nname = "x"\nsettings.timeout_ms = 5\n"data_dir" = "d"\n'
    doc = _doc(text)
    assert doc.line_of("station.settings.timeout_ms") == 3
    assert doc.line_of("station.data_dir") == 4


# ---- one mistake, one problem ------------------------------------------------------------------

NTC = (
    '\n[[steps]]\nid = "ambient"\nkind = "reference-temperature"\nforce_hi = "PT_FH"\n'
    'sense_hi = "PT_SH"\nforce_lo = "PT_FL"\nsense_lo = "PT_SL"\n'
    '\n[[steps]]\nid = "curve"\nkind = "ntc"\nhi = "C_SIG"\nlo = "C_GND"\nr25 = "2.0 kohm"\n'
    'beta = "3450 K"\ntemperature_from = "ambient"\ntolerance = "5 %"\n'
)


@pytest.mark.parametrize(
    ("extra", "low", "key", "fragment"),
    [
        (('max = "30"',), None, "max", '"30"'),  # no unit
        (('max = "30 mA"',), None, "max", "30 mA"),  # a current where a voltage belongs
        (('nominal = "5 V"', 'tolerance = "-0.2 V"'), None, "tolerance", "-0.2 V"),
        (('nominal = "5"', 'tolerance = "5 %"'), None, "nominal", 'nominal = "5"'),
        ((), '"1.0 ohm"', "low", "1.0 ohm"),  # the only limit, and wrong: not also "no limits"
    ],
    ids=["max-no-unit", "max-wrong-unit", "negative-tolerance", "nominal-no-unit", "low-ohm"],
)
def test_a_wrong_limit_is_one_problem_at_its_own_key(
    tmp_path: Path, extra: tuple[str, ...], low: str | None, key: str, fragment: str
) -> None:
    text = HEAD + PROMPT + volts("drop", *extra, low=low)
    (problem,) = problems(tmp_path, text)
    assert problem.key == f"steps[1].{key}"
    assert problem.line == line_with(text, fragment)


def test_a_misspelt_required_key_is_one_problem_at_the_misspelling(tmp_path: Path) -> None:
    text = HEAD + NTC.replace("temperature_from =", "temperature_frm =")
    (problem,) = problems(tmp_path, text)
    assert problem.key == "steps[1].temperature_frm"
    assert problem.line == line_with(text, "temperature_frm")
    assert "'temperature_from'" in problem.message  # the key that was meant, and that it is
    assert "missing" in problem.message  # missing because of this


def test_a_misspelt_table_name_is_one_problem_at_its_header(tmp_path: Path) -> None:
    text = HEAD.replace("[sequence]", "[sequense]") + PROMPT
    (problem,) = problems(tmp_path, text)
    assert (problem.key, problem.line) == ("sequense", 1)
    assert "'sequence'" in problem.message


def test_a_tolerance_without_nominal_says_so(tmp_path: Path) -> None:
    text = HEAD + volts("drop", 'high = "4 V"', 'tolerance = "5 %"', low=None)
    (problem,) = problems(tmp_path, text)
    assert problem.key == "steps[0].tolerance"
    assert "needs a nominal" in problem.message  # not "unknown key": it is a key of the step


# An ntc step read as a divider voltage: every key that only that reading takes, and a tolerance
# and range in volts (docs/sequence-file.md, the ntc step).
NTC_DIVIDER = NTC.replace('tolerance = "5 %"\n', 'tolerance = "0.1 V"\n') + (
    'measure = "voltage"\npullup = "2.49 kohm"\nreference = "5 V"\nrange = "10 V"\n'
    'supply = { pos = "P_5V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }\n'
)


@pytest.mark.parametrize(("written", "found"), [('"volts"', "'volts'"), ("5", "5")])
def test_a_wrong_measure_is_one_problem_at_its_key(
    tmp_path: Path, written: str, found: str
) -> None:
    (tmp_path / "good.toml").write_text(HEAD + NTC_DIVIDER, encoding="utf-8")
    load_sequence(tmp_path / "good.toml")  # with measure right, nothing else is wrong
    text = HEAD + NTC_DIVIDER.replace('measure = "voltage"', f"measure = {written}")
    (problem,) = problems(tmp_path, text)  # not also the divider's keys, as "unknown"
    assert problem.file == str(tmp_path / "seq.toml")
    assert (problem.key, problem.line) == ("steps[1].measure", line_with(text, "measure ="))
    assert problem.message == f"expected one of 'resistance', 'voltage', found {found}"


# ---- problems the planner finds ----------------------------------------------------------------


def plan_problems(tmp_path: Path, text: str) -> list[Problem]:
    path = tmp_path / "seq.toml"
    path.write_text(text, encoding="utf-8")
    sequence = load_sequence(path)  # the file itself is well formed
    with pytest.raises(ConfigError) as caught:
        build_plan(sequence, offline_demo_station("lines", tmp_path))
    return caught.value.problems


def test_a_ground_drop_pin_not_in_the_fixture_is_one_problem_at_its_line(tmp_path: Path) -> None:
    text = HEAD + PROMPT + '\n[[steps]]\nid = "drop"\nkind = "ground-drop"\npin = "C_GROUND"\n'
    text += 'ground = "CHASSIS"\nmax = "30 mV"\n'
    (problem,) = plan_problems(tmp_path, text)
    assert problem.key == "steps[1].pin"  # what the file says, not the role it plays (hi)
    assert problem.line == line_with(text, "C_GROUND")
    assert "'C_GROUND'" in problem.message


def test_a_supply_pin_not_in_the_fixture_is_named_by_its_key(tmp_path: Path) -> None:
    supply = 'supply = { pos = "P_6V", neg = "P_GND", voltage = "5 V", limit = "50 mA" }'
    text = HEAD + PROMPT + volts("powered", supply)
    (problem,) = plan_problems(tmp_path, text)
    assert problem.key == "steps[1].supply.pos"
    assert problem.line == line_with(text, "P_6V")


def test_an_interlock_problem_points_at_its_step(tmp_path: Path) -> None:
    text = HEAD + PROMPT + volts("sig") + volts("same").replace('lo = "C_GND"', 'lo = "C_SIG"')
    (problem,) = plan_problems(tmp_path, text)
    assert problem.key == "steps[2]"
    assert problem.line == header_lines(text)[2]
    assert "interlock" in problem.message


# ---- every problem at once ---------------------------------------------------------------------


def test_a_step_without_an_id_still_has_its_other_keys_checked(tmp_path: Path) -> None:
    text = HEAD + PROMPT + volts(None, 'high = "4 V"', low='"30"')
    found = {(p.key, p.line) for p in problems(tmp_path, text)}
    assert found == {
        ("steps[1].id", header_lines(text)[1]),
        ("steps[1].low", line_with(text, '"30"')),
    }


def test_a_supply_voltage_out_of_range_is_reported_beside_a_missing_limit(tmp_path: Path) -> None:
    supply = 'supply = { pos = "P_5V", neg = "P_GND", voltage = "48 V" }'
    text = HEAD + volts("powered", supply, 'high = "4 V"')
    keys = {p.key for p in problems(tmp_path, text)}
    assert keys == {"steps[0].supply.limit", "steps[0].supply.voltage"}
