"""Running a sequence on a station from files: load, plan, open the bench, run, close."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

from rig.bench_open import check_calibration, close_bench, open_bench
from rig.config import load_collecting
from rig.config.sequence import load_sequence
from rig.config.station import Station, load_station
from rig.config.unit_file import UnitModel, load_unit
from rig.engine import Engine, RunSummary
from rig.errors import ConfigError, Problem
from rig.events import Event
from rig.plan import Plan, build_plan
from rig.run_admission import refuse_unfiled
from rig.station_clock import clock_warnings
from rig.store import ResultStore
from rig.store_sync import SyncReport, send_after_run, send_waiting_runs


def load_plan(sequence_path: Path | str, station: Station | Path | str) -> Plan:
    """Validate both files and plan the run; raises ``ConfigError`` listing every problem."""
    return load_inputs(sequence_path, station)[0]


def load_inputs(
    sequence_path: Path | str, station: Station | Path | str, unit_path: Path | None = None
) -> tuple[Plan, UnitModel | None]:
    """The sequence planned on the station, and the unit file where one is given; raises
    ``ConfigError`` listing every problem of all the files at once (then of the plan), so a
    command can check all its input before it prints anything."""
    problems: list[Problem] = []
    loaded = (
        station
        if isinstance(station, Station)
        else load_collecting(load_station, Path(station), problems)
    )
    sequence = load_collecting(load_sequence, Path(sequence_path), problems)
    unit = load_collecting(load_unit, unit_path, problems)
    if problems:
        raise ConfigError(problems)
    assert loaded is not None and sequence is not None
    return build_plan(sequence, loaded), unit


def run_plan(
    plan: Plan,
    serial: str,
    *,
    operator: str = "",
    unit: str = "",
    faults: tuple[str, ...] = (),
    listener: Callable[[Event], None] | None = None,
    ask: Callable[[str], bool] | None = None,
    store: ResultStore | None = None,
    resume: int | None = None,
    study_part: str = "",
    study_trial: int | None = None,
    on_sync: Callable[[SyncReport], None] | None = None,
    claim: str = "",
    remark: str = "",
    on_server: Callable[[ResultStore], None] | None = None,
) -> RunSummary:
    """Run ``plan`` for ``serial``; with ``resume``, continue that incomplete run instead.

    With its own store and a results server configured, runs waiting in the station's file are
    sent before the run and this one after it (``on_sync`` hears how each went); where the
    send before failed, the one after is not tried (``send_after_run``).  A run that Ctrl-C
    ends is not sent: ``RunInterrupted`` goes on to the caller at once.  ``on_server`` reads the
    server on the send before's connection, before the bench is opened (not where that send
    failed: a run never waits on the network longer for it)."""
    refuse_unfiled(  # before anything is opened
        plan.station, serial, operator, continuing=resume is not None, claim=claim, remark=remark
    )
    warnings = check_calibration(plan.station, reads_probe=plan.reads_reference_probe)
    own_store = store is None
    before = send_waiting_runs(plan.station, on_sync, on_server) if own_store else None
    store = store or ResultStore(plan.station.store_path)
    warnings += clock_warnings(store)
    try:
        bench = open_bench(plan.station)
        try:
            engine = Engine(plan, bench, store, listener=listener, ask=ask)
            summary = engine.run(
                serial,
                operator,
                unit=unit,
                faults=faults,
                warnings=warnings,
                resume=resume,
                study_part=study_part,
                study_trial=study_trial,
                claim=claim,
                remark=remark,
            )
        finally:
            close_bench(bench)
    finally:
        if own_store:
            store.close()
    if own_store:
        send_after_run(plan.station, before, on_sync)
    return summary
