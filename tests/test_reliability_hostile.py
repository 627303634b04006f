"""Hostile text: kept exactly, bound as SQL parameters, never evaluated; undecodable bytes kept
readable in the field and exactly in the run's notes.  All against a real SQLite file and the
virtual bench."""

from __future__ import annotations

import contextlib
import io
import json
import re
import sqlite3
import tempfile
from pathlib import Path

import pytest
from bench_helpers import shipped_bench
from fuzz_inputs import HOSTILE_TEXT
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from rig.cli import main
from rig.entry_text import entered_bytes
from rig.runner import load_plan, run_plan
from rig.store import ResultStore, RunHeader

ROOT = Path(__file__).resolve().parent.parent

# Any Unicode text but lone surrogates (undecodable bytes, kept as \\xNN; tested on their own).
hostile = st.one_of(
    st.sampled_from(HOSTILE_TEXT),
    st.text(st.characters(exclude_categories=["Cs"]), max_size=200),
    st.text(st.characters(max_codepoint=0x1F, exclude_categories=["Cs"]), min_size=1),
    st.builds(
        lambda s, n: s * n, st.sampled_from(["<", "'", '"', "\x00", "é"]), st.integers(1, 20_000)
    ),
)

_SCRATCH = Path(tempfile.mkdtemp(prefix="rig-hostile-"))


def _schema(db: Path) -> list[tuple[str, str]]:
    con = sqlite3.connect(db)
    try:
        return sorted(con.execute("SELECT type, name FROM sqlite_master").fetchall())
    finally:
        con.close()


@settings(
    max_examples=150,
    deadline=None,
    derandomize=True,
    database=None,
    suppress_health_check=list(HealthCheck),
)
@given(hostile, hostile, hostile, hostile)
def test_hostile_text_in_every_text_field_is_stored_exactly(
    serial: str, operator: str, step_text: str, note: str
) -> None:
    path = _SCRATCH / "hostile.sqlite"
    store = ResultStore(path)
    try:
        schema = _schema(path)
        run_id = store.start_run(
            RunHeader(serial, step_text, note, operator, "station'--", operator, serial, (note,))
        )
        store.add_reading(
            run_id,
            step_text,
            role=note,
            function=operator,
            value=1.5,
            range_=10.0,
            nplc=1.0,
            u_std=0.1,
            taken_at=1.0,
            settled=True,
        )
        store.add_step(
            run_id,
            1,
            {
                "step_id": step_text,
                "kind": serial,
                "title": note,
                "value": 1.5,
                "unit": operator,
                "low": None,
                "high": None,
                "predicted": None,
                "u_std": 0.1,
                "expanded_u": 0.2,
                "coverage_k": 2.0,
                "decision_rule": "simple",
                "verdict": "pass",
                "tur": None,
                "started_at": "t0",
                "ended_at": "t1",
                "settle_s": 0.0,
                "note": note,
                "extras": {},
            },
        )
        store.finish_run(run_id, status="complete", verdict="pass", reason=step_text, notes=[note])
        run = store.run(run_id)
        assert (run["serial"], run["operator"], run["unit"]) == (serial, operator, serial)
        assert (run["sequence_name"], run["sequence_hash"], run["reason"]) == (
            step_text,
            note,
            step_text,
        )
        (step,) = store.steps(run_id)
        assert (step["step_id"], step["kind"], step["title"], step["unit"], step["note"]) == (
            step_text,
            serial,
            note,
            operator,
            note,
        )
        (reading,) = store.readings(run_id, step_text)
        assert (reading["role"], reading["function"]) == (note, operator)
        assert _schema(path) == schema  # nothing a value says was run as SQL
    finally:
        store.close()


def _run_cli(argv: list[str]) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(argv)
    return code, out.getvalue(), err.getvalue()


HOSTILE_SEQUENCE = """
[sequence]
name = "hostile"
description = "{payload}"
reorder = false
[[steps]]
id = "signal"
kind = "volts"
title = "{payload}"
hi = "C_SIG"
lo = "C_GND"
low = "0.6 V"
high = "4.8 V"
"""


@pytest.mark.parametrize(
    "serial",
    [
        "<script>alert('x')</script>",
        "'); DROP TABLE runs; --",
        "=1+1\x07\x1b[2J",
        "SN-" + "Ω" * 3000,
    ],
)
def test_a_real_run_keeps_hostile_serial_operator_and_titles(tmp_path: Path, serial: str) -> None:
    sentinel = tmp_path / "EVALUATED"
    payload = f"__import__('pathlib').Path({str(sentinel)!r}).touch() <b>\\\"x\\\"</b>"
    seq = tmp_path / "hostile.toml"
    seq.write_text(HOSTILE_SEQUENCE.format(payload=payload.replace("'", "\\u0027")), "utf-8")
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        summary = run_plan(load_plan(seq, station), serial, operator=serial[::-1])
        store = ResultStore(station.store_path)
        try:
            run = store.run(summary.run_id)
            (step,) = store.steps(summary.run_id)
        finally:
            store.close()
    assert run["serial"] == serial and run["operator"] == serial[::-1]
    assert "__import__" in step["title"] and not sentinel.exists()


def test_undecodable_bytes_in_a_serial_are_kept_exactly_in_the_record(tmp_path: Path) -> None:
    entered = b"SN-\xff\xfe<b>"
    serial = entered.decode("utf-8", "surrogateescape")  # as argv hands such bytes over
    with shipped_bench("temp-circuit", folder=tmp_path) as (_, station):
        code, _, err = _run_cli(
            [
                "run",
                str(ROOT / "sequences" / "temp-circuit-check.toml"),
                "--station",
                str(station.path),
                "--serial",
                serial,
                "--operator",
                serial,
                "--json",
            ]
        )
        assert code == 0, err
        assert "Traceback" not in err
        store = ResultStore(station.store_path)
        try:
            (row,) = store.runs()
            run = store.run(row["id"])
        finally:
            store.close()
    # readable and safe where it is shown: each undecodable byte as \xNN, the rest as entered
    assert run["serial"] == run["operator"] == "SN-\\xff\\xfe<b>"
    # and nothing lost: the exact bytes are in the run's notes
    notes = run["notes"] if isinstance(run["notes"], list) else json.loads(run["notes"])
    assert entered_bytes(notes, "serial") == entered_bytes(notes, "operator") == entered
    assert entered_bytes(["operator was fine"], "serial") is None


PAYLOADS = [
    "__import__('os').system('touch {s}')",
    "exec(open('{s}','w').write('x'))",
    "{{{{ ''.__class__ }}}}",
    "$(touch {s})",
    "`touch {s}`",
]


def test_nothing_in_sequence_or_unit_files_is_evaluated(tmp_path: Path) -> None:
    """Every string value of a shipped sequence and unit file replaced by code that would leave a
    sentinel file if anything evaluated it; parsing (and the errors it reports) leaves none."""
    sentinel = tmp_path / "EVALUATED"
    for source in [
        *sorted((ROOT / "sequences").glob("*.toml")),
        *sorted((ROOT / "sequences" / "units").glob("*.toml")),
    ]:
        for payload in PAYLOADS:
            code = payload.format(s=sentinel).replace("\\", "\\\\").replace('"', '\\"')
            text = re.sub(r'= "[^"]*"', f'= "{code}"', source.read_text("utf-8"))
            target = tmp_path / source.name
            target.write_text(text, "utf-8")
            kind = "units" if source.parent.name == "units" else "sequence"
            from rig.config.sequence import load_sequence
            from rig.config.unit_file import load_unit
            from rig.errors import ConfigError

            with contextlib.suppress(ConfigError):
                (load_unit if kind == "units" else load_sequence)(target)
            assert not sentinel.exists(), f"{source.name}: {payload}"


def test_the_file_readers_contain_no_code_evaluation() -> None:
    """The modules that read data files use no eval, exec, compile, pickle or dynamic import."""
    readers = [
        *sorted((ROOT / "rig" / "config").glob("*.py")),
        ROOT / "rig" / "faults.py",
        ROOT / "rig" / "quantity.py",
        *sorted((ROOT / "rig" / "steps").glob("*.py")),
    ]
    forbidden = re.compile(
        r"(?<![\w.])(eval|exec|compile|__import__)\(|import_module|importlib|\bpickle\b|yaml\.load"
    )
    for path in readers:
        code = "\n".join(
            line
            for line in path.read_text("utf-8").splitlines()
            if not line.lstrip().startswith("#")
        )
        found = [m.group(0) for m in forbidden.finditer(code)]
        assert not found, f"{path}: {found}"
