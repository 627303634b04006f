"""`rig runs`: a returned unit found by its serial, a week's runs by their dates, in the store the
demo wrote through the real drivers; the ids it lists are the ones `rig report` takes."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from rig.cli import main
from rig.demo import CASES, run_demo


@pytest.fixture(scope="module")
def demo_store(tmp_path_factory: pytest.TempPathFactory) -> Path:
    store, _ = run_demo(tmp_path_factory.mktemp("runs"), cases=CASES)
    return store


def listed(capsys: pytest.CaptureFixture[str], store: Path, *args: str) -> list[dict[str, object]]:
    assert main(["runs", "--store", str(store), "--json", *args]) == 0
    return list(json.loads(capsys.readouterr().out)["runs"])


def test_a_serial_finds_its_runs_and_the_id_opens_its_report(
    demo_store: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    everything = listed(capsys, demo_store)
    assert [r["serial"] for r in everything] == [c.serial for c in CASES]  # in the order run
    one = CASES[2].serial
    found = listed(capsys, demo_store, "--serial", one)
    assert [r["serial"] for r in found] == [one]
    # --serial is exact: a serial that is only a prefix of others finds none of them
    assert listed(capsys, demo_store, "--serial", one[:-1]) == []
    run_id = str(found[0]["run"])
    assert (
        main(["report", run_id, "--store", str(demo_store), "--format", "json", "--out", "-"]) == 0
    )
    assert json.loads(capsys.readouterr().out)["run"]["serial"] == one


def test_filters_and_words_for_nothing_found(
    demo_store: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    sequence = CASES[0].sequence
    by_sequence = listed(capsys, demo_store, "--sequence", sequence)
    assert by_sequence and {r["sequence"] for r in by_sequence} == {sequence}
    assert len(by_sequence) == sum(c.sequence == sequence for c in CASES)
    assert listed(capsys, demo_store, "--until", "2000-01-01") == []
    assert main(["runs", "--store", str(demo_store), "--serial", "NOBODY"]) == 0
    assert "no stored run matches" in capsys.readouterr().out
    assert main(["runs", "--store", str(demo_store), "--since", "2026-02-30"]) == 2
    assert "--since: expected a date" in capsys.readouterr().err
