"""The bench the conformance tests (``tests/test_bench_conformance.py``) prove: the virtual bench
by default, a real one when ``--bench-station FILE`` (or ``RIG_BENCH_STATION``) names its station
file.

The rest of the suite needs the virtual bench (it injects faults and reads the simulated
instruments' counters); these tests need only what every bench has, so a test engineer runs the
same checks on a new or repaired real bench as CI runs on the virtual one (docs/station-file.md,
"Proving a real bench").
"""

from __future__ import annotations

import os
from collections.abc import Iterator
from pathlib import Path

import pytest

from rig.config.station import Station, load_station
from rig.errors import RigError

ENV = "RIG_BENCH_STATION"


def pytest_addoption(parser: pytest.Parser) -> None:
    parser.addoption(
        "--bench-station",
        metavar="FILE",
        default=os.environ.get(ENV) or None,
        help=(
            "prove the real bench of this station file in tests/test_bench_conformance.py "
            f"(default: ${ENV}, else the virtual bench)"
        ),
    )


@pytest.fixture(scope="session")
def bench_station(
    request: pytest.FixtureRequest, tmp_path_factory: pytest.TempPathFactory
) -> Iterator[Station]:
    """The station whose bench is proven: a real one named on the command line, or a started
    virtual bench of the shipped ``temp-circuit`` unit."""
    given = request.config.getoption("--bench-station")
    if given:
        try:
            yield load_station(Path(given))
        except RigError as exc:
            pytest.exit(f"--bench-station {given}: {exc}", returncode=2)
        return
    from bench_helpers import shipped_bench

    with shipped_bench("temp-circuit", folder=tmp_path_factory.mktemp("bench")) as (_, station):
        yield station
