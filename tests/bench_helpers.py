"""Starting the virtual bench for a shipped unit and planning a shipped sequence on it."""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from rig.config.fixture import load_fixture
from rig.config.station import Station, load_station
from rig.config.unit_file import load_unit
from rig.faults import parse_faults
from rig.plan import Plan
from rig.runner import load_plan
from rig.sim.bench import VirtualBench

SEQUENCES = Path(__file__).resolve().parent.parent / "sequences"


@contextmanager
def shipped_bench(
    unit_name: str, faults: tuple[str, ...] = (), *, folder: Path, **bench_args: object
) -> Iterator[tuple[VirtualBench, Station]]:
    """A started virtual bench for ``sequences/units/<unit_name>.toml`` and its station file."""
    unit = load_unit(SEQUENCES / "units" / f"{unit_name}.toml")
    fixture = load_fixture(unit.fixture_path)
    bench = VirtualBench(unit, fixture, faults=parse_faults(list(faults), unit), **bench_args)  # type: ignore[arg-type]
    bench.start()
    try:
        path = bench.write_station(folder / "station.toml", data_dir=str(folder / "data"))
        yield bench, load_station(path)
    finally:
        bench.stop()


def shipped_plan(sequence_name: str, station: Station) -> Plan:
    return load_plan(SEQUENCES / f"{sequence_name}.toml", station)


MIDWAY_STOP = """\
# A test sequence, invented for the test: a check, a question, two checks after it.
[sequence]
name = "stops-midway"
reorder = false

[[steps]]
id = "lead-check"
kind = "resistance"
hi = "T1"
lo = "T2"
low = "1 kohm"
high = "4 kohm"

[[steps]]
id = "seated"
kind = "prompt"
text = "Is the sender seated in the well?"

[[steps]]
id = "lead-check-4w"
kind = "resistance"
hi = "T1"
lo = "T2"
wires = 4
low = "1 kohm"
high = "4 kohm"

[[steps]]
id = "hold"
kind = "soak"
duration = "0.1 s"
"""
"""A run of this on the NTC sender with no answer to its question stops at its second step."""
