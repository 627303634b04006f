"""Wire lists: reading, nets and splices, the join to the fixture, and errors that name the row,
the column and the value."""

from __future__ import annotations

from pathlib import Path

import pytest

from rig.config.fixture import load_fixture
from rig.errors import ConfigError
from rig.harness.wire_list import Net, load_wire_list, write_wire_list

SHIPPED = Path(__file__).resolve().parent.parent / "sequences" / "harness"
HEADER = "wire,net,from_connector,from_pin,to_connector,to_pin,gauge,length_m,colour\n"


def _write(tmp_path: Path, body: str, header: str = HEADER) -> Path:
    path = tmp_path / "wires.csv"
    path.write_text("# invented test data\n" + header + body, encoding="utf-8")
    return path


def _problems(path: Path, fixture_path: Path | None = None) -> list[str]:
    fixture = None if fixture_path is None else load_fixture(fixture_path)
    with pytest.raises(ConfigError) as caught:
        load_wire_list(path, fixture)
    return [str(p) for p in caught.value.problems]


def test_shipped_wire_list_joins_its_fixture_with_a_splice_net() -> None:
    fixture = load_fixture(SHIPPED / "fixture.toml")
    wires = load_wire_list(SHIPPED / "wire-list.csv", fixture)
    assert len(wires.nets) == 10
    ground = next(n for n in wires.nets if n.name == "GROUND")
    assert ground.pins == ("J1-10", "J2-8", "J3-4")
    assert ground.splices == ("SP1",)
    assert [r.wire for r in ground.path("J1-10", "J3-4")] == ["W10a", "W10c"]
    assert ground.splices_between("J2-8", "J3-4") == ["SP1"]


def test_each_bad_cell_is_named_by_line_column_and_value(tmp_path: Path) -> None:
    path = _write(
        tmp_path,
        "W1,A,J1,1,J2,1,18 AWG,2.0,red\n"
        "W2,B,J1,2,J2,2,19 furlongs,2.0,red\n"  # line 4
        "W3,C,J1,3,J2,3,0.5 mm2,-1,red\n"  # line 5
        "W4,D,J1,4,,4,0.5 mm2,1.0,red\n"  # line 6
        "W1,E,J1,5,J2,5,0.5 mm2,1.0,red\n",  # line 7: id used twice
    )
    problems = _problems(path)
    assert any(":4 [row 4, column gauge]" in p and "19 furlongs" in p for p in problems)
    assert any(":5 [row 5, column length_m]" in p and "'-1'" in p for p in problems)
    assert any(":6 [row 6, column to_connector]" in p for p in problems)
    assert any(":7 [row 7, column wire]" in p and "row 3" in p for p in problems)


def test_missing_and_unknown_columns_are_reported(tmp_path: Path) -> None:
    path = _write(
        tmp_path, "J1,1,J2,1,18 AWG\n", header="from_connector,from_pin,to_connector,guage\n"
    )
    problems = _problems(path)
    assert any("unknown column 'guage'" in p for p in problems)
    assert any("missing column 'to_pin'" in p for p in problems)


def test_columns_rig_does_not_read_are_ignored_and_named(tmp_path: Path) -> None:
    # CAD exports carry part numbers and notes beside the connection columns (common practice,
    # no published source); rig reads what it needs and names what it left unread.
    path = _write(
        tmp_path,
        "W1,A,J1,1,J2,1,18 AWG,2.0,red,123-456,spare loop\n",
        header=HEADER.rstrip("\n") + ",part_number, note\n",
    )
    wires = load_wire_list(path, load_fixture(SHIPPED / "fixture.toml"))
    assert wires.ignored == ("part_number", "note")
    assert wires.rows[0].colour == "red" and wires.nets[0].pins == ("J1-1", "J2-1")
    assert wires.ignored_note() == (
        "wire list wires.csv: columns not read by rig, ignored: 'part_number', 'note'"
    )


def test_a_column_close_to_one_rig_reads_is_refused_as_a_misspelling(tmp_path: Path) -> None:
    # ignored, `to_conector` would leave every wire's far end unread: one problem, naming the
    # column it looks like (and not also a missing `to_connector`)
    path = _write(
        tmp_path,
        "W1,A,J1,1,J2,1,18 AWG,2.0,red,x\n",
        header="wire,net,from_connector,from_pin,to_conector,to_pin,gauge,length_m,colour,colour\n",
    )
    problems = _problems(path)
    assert len(problems) == 2, problems
    assert ":2 [header]: unknown column 'to_conector'; did you mean 'to_connector'?" in problems[0]
    assert "column 'colour' is given 2 times" in problems[1]


def test_rows_sharing_ends_must_agree_on_their_net(tmp_path: Path) -> None:
    path = _write(
        tmp_path,
        "W1,PWR,J1,1,SP1,,18 AWG,1.0,red\nW2,GND,SP1,,J2,1,18 AWG,1.0,red\n",
    )
    assert any("column net" in p and "'GND', 'PWR'" in p for p in _problems(path))


def test_pins_must_be_fixture_pins(tmp_path: Path) -> None:
    path = _write(tmp_path, "W1,A,J1,1,J9,4,18 AWG,1.0,red\n")
    problems = _problems(path, SHIPPED / "fixture.toml")
    assert any("[row 3, column to_pin]" in p and "J9-4 is not a pin" in p for p in problems)


def test_captured_rows_need_their_temperature_and_round_trip(tmp_path: Path) -> None:
    header = "wire,net,from_connector,from_pin,to_connector,to_pin,measured_ohm,measured_at_c\n"
    bad = _write(tmp_path, "C1,N1,J1,1,J2,1,0.05,\n", header=header)
    assert any("column measured_at_c" in p for p in _problems(bad))
    good = _write(tmp_path, "C1,N1,J1,1,J2,1,0.05,21.5\n", header=header)
    wires = load_wire_list(good)
    again = load_wire_list(write_wire_list(tmp_path / "again.csv", wires.rows, ["test"]))
    assert again.rows[0].measured_ohm == pytest.approx(0.05)
    assert again.rows[0].measured_at_c == pytest.approx(21.5)
    assert again.nets[0].pins == ("J1-1", "J2-1")


def test_a_harness_step_reports_its_wire_list_and_net_limit_problems(tmp_path: Path) -> None:
    from rig.config.sequence import load_sequence

    (tmp_path / "wires.csv").write_text(
        HEADER + "W1,A,J1,1,J2,1,18 AWG,2.0,red\nW2,B,J1,2,J2,2,18 AWG,zero,red\n",
        encoding="utf-8",
    )
    sequence = tmp_path / "seq.toml"
    sequence.write_text(
        '[sequence]\nname = "t"\n\n[[steps]]\nid = "h"\nkind = "harness-proof"\n'
        'wire_list = "wires.csv"\ntemperature = "23 degC"\n'
        'isolation_method = "sometimes"\nnet_limits = { NOPE = "1 ohm" }\n',
        encoding="utf-8",
    )
    with pytest.raises(ConfigError) as caught:
        load_sequence(sequence)
    text = "\n".join(str(p) for p in caught.value.problems)
    assert "wires.csv:3 [row 3, column length_m]" in text and "'zero'" in text
    assert "[steps[0].isolation_method]" in text and "'sometimes'" in text
    assert "[steps[0].net_limits.NOPE]" not in text  # the list did not load: no nets to check


def test_a_harness_step_names_an_unknown_net(tmp_path: Path) -> None:
    from rig.config.sequence import load_sequence

    (tmp_path / "wires.csv").write_text(HEADER + "W1,A,J1,1,J2,1,18 AWG,2.0,red\n", "utf-8")
    sequence = tmp_path / "seq.toml"
    sequence.write_text(
        '[sequence]\nname = "t"\n\n[[steps]]\nid = "h"\nkind = "harness-proof"\n'
        'wire_list = "wires.csv"\ntemperature = "23 degC"\nnet_limits = { NOPE = "1 ohm" }\n',
        encoding="utf-8",
    )
    with pytest.raises(ConfigError) as caught:
        load_sequence(sequence)
    assert any(
        "net_limits.NOPE" in p.key and "no net 'NOPE'" in p.message for p in caught.value.problems
    )


def test_the_rows_that_alone_cut_a_part_off_a_net_with_two_splices(tmp_path: Path) -> None:
    # An invented net: a trunk T from J1-1 to splice S1, a branch B1 to J2-1, a link L from S1
    # to splice S2, and branches B2, B3 to J3-1 and J3-2; plus a two-pin net in a chain of two
    # rows through a splice (either row open cuts J4-1 from J5-1).
    path = _write(
        tmp_path,
        "T,,J1,1,S1,,1.0 mm2,1.0,\nB1,,S1,,J2,1,1.0 mm2,1.0,\nL,,S1,,S2,,1.0 mm2,1.0,\n"
        "B2,,S2,,J3,1,1.0 mm2,1.0,\nB3,,S2,,J3,2,1.0 mm2,1.0,\n"
        "C1,,J4,1,S3,,1.0 mm2,1.0,\nC2,,S3,,J5,1,1.0 mm2,1.0,\n",
    )
    star, chain = load_wire_list(path).nets

    def cut(net: Net, part: list[str]) -> list[str]:
        return [row.wire for row in net.separating_rows(part)]

    assert cut(star, ["J1-1"]) == ["T"]  # the trunk: every branch beyond it reads good
    assert cut(star, ["J2-1", "J3-1", "J3-2"]) == ["T"]  # the same cut, seen from the rest
    assert cut(star, ["J3-1", "J3-2"]) == ["L"]  # the link between the splices
    assert cut(star, ["J3-1"]) == ["B2"]  # one branch
    assert cut(star, ["J2-1", "J3-1"]) == []  # no single open cuts off these two
    assert cut(chain, ["J5-1"]) == ["C1", "C2"]


def test_a_file_that_is_no_wire_list_is_named_so_at_its_first_line(tmp_path: Path) -> None:
    # the shipped sequence given where its wire list goes (a technician's slip): one problem at
    # the line its header would be, not the CSV library's words about a later line
    sequence = Path(__file__).parents[1] / "sequences" / "harness" / "harness-proof.toml"
    with pytest.raises(ConfigError) as caught:
        load_wire_list(sequence)
    [problem] = caught.value.problems
    first = next(
        n
        for n, line in enumerate(sequence.read_text().splitlines(), start=1)
        if line.strip() and not line.startswith("#")
    )
    assert problem.line == first
    assert str(problem).startswith(f"{sequence}:{first} [header]: not a wire list: its first line")
