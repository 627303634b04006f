"""Messages a test engineer meets while writing sequences and fault specs, and the README's
command summary, against what rig really prints and takes.

Source: the pages themselves (``docs/fault-specs.md``, ``docs/sequence-file.md``, ``README.md``);
that documented messages and usage are checked by running rig is common practice.
"""

from __future__ import annotations

import argparse
import re
from pathlib import Path

import pytest
from doc_blocks import ROOT, fenced, section, write_complete_examples

from rig.cli import _parser, main
from rig.config.unit_file import load_unit
from rig.errors import ConfigError
from rig.faults import parse_faults
from rig.quantity import QuantityError, parse_quantity

SEQUENCES = ROOT / "sequences"


def test_fault_spec_messages_are_what_rig_prints(
    tmp_path: Path, monkeypatch: pytest.MonkeyPatch
) -> None:
    # the page's messages are for its example unit, saved as unit.toml
    write_complete_examples(tmp_path)
    monkeypatch.chdir(tmp_path)
    unit = load_unit("unit.toml")
    shown = fenced(section("fault-specs.md", "## Checks and error messages"), "")[0].splitlines()
    printed = []
    for line in shown:
        match = re.match(r"fault spec \[(.*?)\]: ", line)
        assert match, line
        try:
            parse_faults([match.group(1)], unit, source="fault spec")
        except ConfigError as exc:
            printed += [str(problem) for problem in exc.problems]
    assert printed == shown


def test_a_value_without_its_unit_is_quoted_as_written(capsys: pytest.CaptureFixture[str]) -> None:
    args = ["sim", "--unit", str(SEQUENCES / "units" / "temp-circuit.toml")]
    assert main([*args, "--fault", "series:ground=15", "--station-out", "unused.toml"]) == 2
    err = capsys.readouterr().err
    assert "--fault [series:ground=15]: '15' has no unit; expected a value in ohm" in err


def test_coverage_says_once_what_it_expected(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from offline_station import offline_station_text

    station = tmp_path / "station.toml"
    station.write_text(
        offline_station_text("s", SEQUENCES / "demo-fixture.toml", tmp_path), encoding="utf-8"
    )
    args = ["coverage", str(SEQUENCES / "temp-circuit-check.toml"), "--station", str(station)]
    unit = str(SEQUENCES / "units" / "temp-circuit.toml")
    assert main([*args, "--unit", unit, "--series", "15"]) == 2
    err = capsys.readouterr().err.splitlines()
    assert err == [
        "rig: the input has problems:",
        "  --series [15]: '15' has no unit; expected a value in ohm",
    ]


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("30 min", "unknown unit 'min'; times are in seconds: write '1800 s'"),
        ("1.5 h", "unknown unit 'h'; times are in seconds: write '5400 s'"),
        ("2 m", "expected a value in s, found '2 m' (a value in m); times are in seconds: "
                "write '120 s'"),
    ],
)  # fmt: skip
def test_a_time_in_minutes_or_hours_gets_its_seconds(text: str, message: str) -> None:
    with pytest.raises(QuantityError) as caught:
        parse_quantity(text, "s")
    assert str(caught.value) == message


def test_minutes_are_suggested_only_where_a_time_is_expected() -> None:
    with pytest.raises(QuantityError, match=r"^unknown unit 'min'$"):
        parse_quantity("30 min", "ohm")


def test_a_settle_in_minutes_names_the_key_and_the_seconds(tmp_path: Path) -> None:
    from rig.config.sequence import load_sequence

    path = tmp_path / "s.toml"
    path.write_text(
        '[sequence]\nname = "s"\nsettle = "30 min"\n\n[[steps]]\nid = "w"\nkind = "soak"\n'
        'duration = "1 s"\n',
        encoding="utf-8",
    )
    with pytest.raises(ConfigError) as caught:
        load_sequence(path)
    assert [str(p) for p in caught.value.problems] == [
        f"{path}:3 [sequence.settle]: unknown unit 'min'; times are in seconds: write '1800 s'"
    ]


@pytest.mark.parametrize(
    ("text", "unit", "hint"),
    [
        ("10 mv", "V", "did you mean 'mV'?"),  # a valid prefix kept as typed: not 'MV'
        ("4.7 KOhm", "ohm", "did you mean 'kohm'?"),  # kilo is k (table 7); no prefix K
        ("4.7 Kohm", "ohm", "did you mean 'kohm'?"),
        ("1 KV", "V", "did you mean 'kV'?"),
        ("50 hz", "Hz", "did you mean 'Hz'?"),  # hertz is Hz (table 4)
        ("47 NF", "F", "did you mean 'nF'?"),
        ("2 MOHM", "ohm", "did you mean 'Mohm' (mega) or 'mohm' (milli)? Prefixes are "
                          "case-sensitive"),  # in capitals the prefix's case says nothing
    ],
)  # fmt: skip
def test_a_unit_in_the_wrong_letter_case_gets_the_spelling_meant(
    text: str, unit: str, hint: str
) -> None:
    # Source: the SI Brochure (BIPM, 9th edition, 2019), table 7 (prefixes: k kilo, M mega,
    # m milli, n nano ...) and table 3 (base units: A, s, m ...), with table 4 for V, Hz and F;
    # ohm is rig's own spelling of the symbol Ω
    with pytest.raises(QuantityError) as caught:
        parse_quantity(text, unit)
    symbol = text.split()[1]
    assert str(caught.value) == f"unknown unit {symbol!r}; {hint}"
    meant = re.findall(r"'([^']+)'", hint)
    number = float(text.split()[0])
    factor = {"m": 1e-3, "k": 1e3, "M": 1e6, "n": 1e-9}
    for spelling in meant:  # each spelling offered is one rig reads, with its prefix's factor
        prefix = spelling[: -len(unit)] if spelling.lower().endswith(unit.lower()) else ""
        assert parse_quantity(f"{number} {spelling}", unit) == pytest.approx(
            number * factor.get(prefix, 1.0)
        )


def test_no_spelling_is_offered_in_a_unit_other_than_the_one_expected() -> None:
    # 'M' read in another case is 'm' (metre), no resistance; 'k' is 'K' (kelvin)
    for text in ("1 M", "1 k", "1 mv"):
        with pytest.raises(QuantityError) as caught:
            parse_quantity(text, "ohm")
        assert str(caught.value) == f"unknown unit {text.split()[1]!r}"


def test_a_miscased_unit_in_a_unit_file_names_its_key_line_and_the_spelling(
    tmp_path: Path,
) -> None:
    write_complete_examples(tmp_path)
    path = tmp_path / "unit.toml"
    text = path.read_text(encoding="utf-8")
    assert '"2.49 kohm"' in text
    path.write_text(text.replace('"2.49 kohm"', '"2.49 KOhm"', 1), encoding="utf-8")
    with pytest.raises(ConfigError) as caught:
        load_unit(path)
    line = next(n for n, row in enumerate(path.read_text().splitlines(), 1) if "KOhm" in row)
    assert [str(p) for p in caught.value.problems] == [
        f"{path}:{line} [resistors.pullup.value]: unknown unit 'KOhm'; did you mean 'kohm'?"
    ]


def test_the_value_messages_the_sequence_page_lists() -> None:
    shown = fenced(section("sequence-file.md", "## Values with units"), "")[0].splitlines()
    # the values the page names before the block, with the unit each is read as
    tried = [
        ("3450", "K"),
        (1.5, "m"),
        ("2.49k", "ohm"),
        ("20 psi", "Pa"),
        ("10 V", "ohm"),
        ("1,5 V", "V"),
        ("30 min", "s"),
        ("10 mv", "V"),
        ("2 MOHM", "ohm"),
    ]
    printed = []
    for value, unit in tried:
        with pytest.raises(QuantityError) as caught:
            parse_quantity(value, unit)
        printed.append(str(caught.value))
    assert printed == shown


def _flags(usage: str) -> tuple[set[str], set[str]]:
    """The flags of one usage line, outside and inside square brackets."""
    inside = {f for part in re.findall(r"\[[^\]]*\]", usage) for f in re.findall(r"--[\w-]+", part)}
    outside = set(re.findall(r"--[\w-]+", re.sub(r"\[[^\]]*\]", "", usage)))
    return outside, inside


def test_the_readme_brackets_exactly_the_options_rig_can_do_without() -> None:
    """A flag the commands table shows without brackets is one the command needs (required, or
    one of a group of which it needs one); a bracketed one it can do without."""
    commands = next(
        a for a in _parser()._actions if isinstance(a, argparse._SubParsersAction)
    ).choices
    rows = [
        line
        for line in (ROOT / "README.md").read_text(encoding="utf-8").splitlines()
        if line.startswith("| `rig ")
    ]
    checked = 0
    for row in rows:
        usages = re.findall(r"`(rig [^`]*)`", row.split(" | ")[0])
        for name in {u.split()[1] for u in usages}:
            parser = commands[name]
            shown = [_flags(u) for u in usages if u.split()[1] == name]
            outside = set().union(*(o for o, _ in shown))
            inside = set().union(*(i for _, i in shown))
            grouped = {
                flag
                for group in parser._mutually_exclusive_groups
                for action in group._group_actions
                for flag in action.option_strings
            }
            for action in parser._actions:
                for flag in action.option_strings:
                    if flag in outside - inside:
                        assert action.required or flag in grouped, f"{row}: {flag} is optional"
                        checked += 1
                    if flag in inside - outside:
                        assert not action.required, f"{row}: {flag} is required"
                        checked += 1
    assert checked > 20
