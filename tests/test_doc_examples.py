"""The error messages the file-format pages show are what rig prints for the broken files.

Each file-format page's "Error messages" section shows real output on broken files
(``bad/f1.toml`` ...).  Those files are kept in ``tests/data/doc-examples``; each test copies them
to ``bad/`` in a temporary folder (with the shipped demo fixture and, as ``sequence.toml``, the
sequence page's complete example beside them), runs rig on them the way the page says, shortens
the temporary folder out of the paths as the pages do, and compares every example line with what
rig printed, in order.  A page whose examples drift from rig's output, or that leaves a line out,
fails.

Source: the pages themselves (``docs/*-file.md``); that documentation examples are checked by
running them is common practice, no published source.
"""

from __future__ import annotations

import shutil
from collections.abc import Callable
from pathlib import Path

import pytest
from doc_blocks import ROOT, complete_example, fenced, section

from rig.cli import main

DATA = ROOT / "tests" / "data" / "doc-examples"

Run = Callable[[pytest.CaptureFixture[str]], list[str]]


def _cli(*args: str) -> Run:
    """A run of the ``rig`` command: the lines it prints on stderr, problems unindented."""

    def run(capsys: pytest.CaptureFixture[str]) -> list[str]:
        capsys.readouterr()
        main(list(args))
        lines = capsys.readouterr().err.splitlines()
        return [line.strip() for line in lines if line != "rig: the input has problems:"]

    return run


def _check(station: str, sequence: str = "bad/sequence.toml") -> Run:
    return _cli("check", sequence, "--station", f"bad/{station}.toml")


# What each page runs, in the order its examples show the output.
PAGES: dict[str, list[Run]] = {
    "fixture-file.md": [_cli("check", "--fixture", f"bad/{name}.toml") for name in ("f1", "f2")],
    "station-file.md": [
        _check("st1"),
        _check("st2"),
        _check("st4"),
        _cli("run", "bad/sequence.toml", "--station", "bad/st5.toml", "--serial", "D1", "--yes"),
        _check("st6"),
        _cli("run", "bad/sequence.toml", "--station", "bad/st7.toml", "--serial", "D1", "--yes"),
        _check("st8"),
        _check("st9"),
    ],
    "unit-file.md": [
        _cli("check", "--unit", f"bad/{name}.toml")
        for name in ("u1", "u2", "u3", "u7", "u6", "u8", "u9", "u4", "nofile")
    ],
    "sequence-file.md": [
        *(
            _check("station", f"bad/{name}.toml")
            for name in ("s1", "s2", "s3", "s4", "s5", "s7", "s6")
        ),
        _check("demo-station", "bad/p1.toml"),
        _check("p-station", "sequence.toml"),
    ],
}


def example_lines(page: str) -> list[str]:
    """The lines of the output blocks (fences without a language) under "## Error messages"."""
    blocks = fenced(section(page, "## Error messages"), "")
    return [line for block in blocks for line in block.splitlines()]


@pytest.mark.parametrize("page", sorted(PAGES))
def test_page_shows_what_rig_prints(
    page: str,
    tmp_path: Path,
    monkeypatch: pytest.MonkeyPatch,
    capsys: pytest.CaptureFixture[str],
) -> None:
    shutil.copytree(DATA, tmp_path / "bad")
    shutil.copy(ROOT / "sequences" / "demo-fixture.toml", tmp_path / "bad")
    shutil.copy(DATA / "sequence.toml", tmp_path)
    monkeypatch.chdir(tmp_path)
    printed = [line for run in PAGES[page] for line in run(capsys)]
    shown = [line.replace(f"{tmp_path.resolve()}/", "") for line in printed]
    assert example_lines(page) == shown


@pytest.mark.parametrize(
    ("page", "name"),
    [
        ("station-file.md", "station.toml"),
        ("fixture-file.md", "fixture.toml"),
        ("sequence-file.md", "sequence.toml"),
    ],
)
def test_the_kept_examples_are_the_pages_own(page: str, name: str) -> None:
    """``bad/station.toml`` and the rest are the complete examples the pages show, as they are."""
    assert (DATA / name).read_text(encoding="utf-8") == complete_example(page)
