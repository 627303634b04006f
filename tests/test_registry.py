"""Drivers found by name through the ``rig.drivers`` entry-point group.

The extra entry points below are declared the way any installed package declares them (a
``*.dist-info/entry_points.txt`` on ``sys.path``, per the Python packaging "Entry points
specification"), so importlib.metadata finds them with no patching.
"""

from __future__ import annotations

from pathlib import Path

import pytest
from small_bench import SmallBench

from drivers.base import InstrumentIdentity
from drivers.registry import driver_names, load_driver, open_instrument
from drivers.scpi_dmm import ScpiDmm
from drivers.scpi_supply import ScpiSupply
from rig.errors import RigError
from rig.sim.scpi_server import ScpiTcpServer
from rig.sim.sim_dmm import SimDmm
from rig.sim.timing import BenchClock


def install_entry_points(root: Path, lines: list[str]) -> None:
    dist = root / "rig_test_plugins-1.0.dist-info"
    dist.mkdir()
    (dist / "METADATA").write_text("Metadata-Version: 2.1\nName: rig-test-plugins\nVersion: 1.0\n")
    (dist / "entry_points.txt").write_text("[rig.drivers]\n" + "\n".join(lines) + "\n")


@pytest.fixture
def plugins(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> None:
    install_entry_points(
        tmp_path,
        [
            "needs-missing = rig_no_such_module_xyz.meter:Meter",
            "not-a-driver = json:dumps",
            "wrong-attribute = drivers.scpi_dmm:NoSuchClass",
        ],
    )
    monkeypatch.syspath_prepend(str(tmp_path))


def test_shipped_drivers_load_by_name() -> None:
    assert load_driver("scpi-dmm") is ScpiDmm
    assert load_driver("scpi-supply") is ScpiSupply
    assert {"scpi-dmm", "scpi-supply", "serial-relay-box"} <= set(driver_names())


def test_unknown_name_lists_the_known_ones() -> None:
    with pytest.raises(RigError, match=r"unknown driver 'nope'.*scpi-dmm, scpi-supply"):
        load_driver("nope")


@pytest.mark.usefixtures("plugins")
def test_missing_dependency_explains_itself_only_when_asked_for() -> None:
    names = driver_names()  # listing does not import anything
    assert "needs-missing" in names
    assert load_driver("scpi-dmm") is ScpiDmm  # other drivers are unaffected
    with pytest.raises(RigError, match=r"rig_no_such_module_xyz.*is not installed"):
        load_driver("needs-missing")


@pytest.mark.usefixtures("plugins")
def test_entry_points_that_are_not_drivers_are_refused() -> None:
    with pytest.raises(RigError, match="not an instrument driver class"):
        load_driver("not-a-driver")
    with pytest.raises(RigError, match="does not exist"):
        load_driver("wrong-attribute")


def test_open_instrument_opens_a_working_driver() -> None:
    identity = InstrumentIdentity("Test Works", "DM-6", "0001", "2.1")
    with ScpiTcpServer(SimDmm(SmallBench(), BenchClock(), identity=identity), name="dmm") as srv:
        meter = open_instrument("scpi-dmm", "dmm", srv.resource, {"timeout_ms": 300})
        assert isinstance(meter, ScpiDmm)
        assert meter.name == "dmm" and meter.resource == srv.resource
        assert meter.identity() == identity
        meter.close()
