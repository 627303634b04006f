"""``rig check`` warns of a unit file's node that misses the fixture pin it was meant to be.

Any name that is not a pin is an internal node, so a pin misspelt in a unit file was valid and
the virtual bench simulated a disconnected sensor.  A node touched by one part alone carries no
current (Kirchhoff's current law: the currents into a node sum to zero, and one part's current is
all there is), so that part is connected to nothing there.  The files are the docs' complete
examples with one change each; the check still passes (exit 0), with a warning that names the
file, line and key.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from doc_blocks import write_complete_examples

from rig.cli import main
from rig.config.fixture import load_fixture
from rig.config.unit_file import load_unit
from rig.config.unit_nodes import node_warnings

ROOT = Path(__file__).resolve().parent.parent
SHIPPED_UNITS = sorted((ROOT / "sequences" / "units").glob("*.toml"))


@pytest.fixture
def example(tmp_path: Path) -> dict[str, Path]:
    return write_complete_examples(tmp_path)


def _mutated(example: dict[str, Path], old: str, new: str) -> Path:
    path = example["unit.toml"]
    text = path.read_text(encoding="utf-8")
    assert text.count(old) == 1, f"{old!r} must occur once in the example"
    path.write_text(text.replace(old, new), encoding="utf-8")
    return path


def _line(path: Path, fragment: str) -> int:
    lines = path.read_text(encoding="utf-8").splitlines()
    return next(n for n, line in enumerate(lines, start=1) if fragment in line)


@pytest.mark.parametrize(
    ("old", "new", "key", "says"),
    [
        (
            'between = ["S_SIG", "C_SIG"]',
            'between = ["S_SIGG", "C_SIG"]',
            "wires.signal.between",
            "node 'S_SIGG' is touched by wires.signal alone, so nothing can flow through it: "
            "that part is left unconnected there; did you mean 'S_SIG'?",
        ),
        (
            'ground = "C_RET"',
            'ground = "c_ret"',
            "controller.ground",
            "node 'c_ret' differs from fixture pin 'C_RET' only in letter case, so it is an "
            "internal node of the unit, not the pin (names are case-sensitive); it is touched "
            "by controller.sources.reference alone",
        ),
        (
            'node = "REF5"',
            'node = "REF"',
            "controller.sources.reference.node",
            "node 'REF' is touched by controller.sources.reference alone",
        ),
    ],
    ids=["one-letter", "letter-case", "dangling-internal"],
)
def test_a_node_that_misses_its_pin_is_a_warning(
    example: dict[str, Path],
    capsys: pytest.CaptureFixture[str],
    old: str,
    new: str,
    key: str,
    says: str,
) -> None:
    unit = _mutated(example, old, new)
    code = main(["check", "--unit", str(unit)])
    out = capsys.readouterr().out
    assert code == 0, "a warning, not an error: internal nodes are allowed"
    where = f"warning: {unit}:{_line(unit, new)} [{key}]: "
    warned = [line for line in out.splitlines() if line.startswith(where)]
    assert len(warned) == 1, out
    assert says in warned[0]


def test_the_node_left_behind_by_a_renamed_one_is_named_too(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    unit = _mutated(example, 'node = "REF5"', 'node = "REF"')
    main(["check", "--unit", str(unit)])
    out = capsys.readouterr().out
    assert "[resistors.pullup.between]: node 'REF5' is touched by resistors.pullup alone" in out


def test_a_node_warning_is_shown_with_a_sequence_too(
    example: dict[str, Path], capsys: pytest.CaptureFixture[str]
) -> None:
    unit = _mutated(example, 'ground = "C_RET"', 'ground = "c_ret"')
    args = [example["sequence.toml"], "--station", example["station.toml"], "--unit", unit]
    assert main(["check", *(str(a) for a in args)]) == 0
    assert "[controller.ground]: node 'c_ret' differs" in capsys.readouterr().out


@pytest.mark.parametrize("path", SHIPPED_UNITS, ids=lambda p: p.name)
def test_shipped_units_and_internal_nodes_that_join_parts_give_no_warning(path: Path) -> None:
    """``ntc-sender.toml`` joins its leads to its sensor at ``T1x``, one letter from pin ``T1``:
    a name of choice, touched by two parts, not a slip."""
    unit = load_unit(path)
    assert node_warnings(unit, load_fixture(unit.fixture_path).pins) == []
