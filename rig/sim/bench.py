"""The virtual bench: a unit on its fixture behind a SCPI DMM, a SCPI supply (TCP on 127.0.0.1)
and the relay box (on a pseudo-terminal), exactly as a real bench presents itself to rig.

``VirtualBench.start()`` serves all three and returns where they are; ``write_station()`` writes a
station file that points at them, so ``rig run`` and the tests go through the real pyvisa and
pyserial stacks.  Faults can be injected and cleared while it runs; with a state file, the live
state (closed relays, supply outputs on, active faults, watchdog) is replaced atomically on every
change so that outside checks read the bench's real state.
"""

from __future__ import annotations

import json
import logging
import os
import tempfile
import threading
from dataclasses import dataclass
from pathlib import Path

from drivers.base import InstrumentIdentity
from rig.config.fixture import FixtureMap
from rig.config.unit_file import UnitModel
from rig.faults import Fault
from rig.sim.circuit_probe import CircuitProbe
from rig.sim.probe import SupplySettings
from rig.sim.scpi_server import ScpiTcpServer
from rig.sim.sim_dmm import SimDmm
from rig.sim.sim_relay_box import SimRelayBox
from rig.sim.sim_supply import SimSupply
from rig.sim.timing import BenchClock, Timing

log = logging.getLogger(__name__)

SIM_DMM_IDENTITY = InstrumentIdentity("rig", "virtual-dmm", "VB-DMM-0001", "1.0")
SIM_SUPPLY_IDENTITY = InstrumentIdentity("rig", "virtual-supply", "VB-PSU-0001", "1.0")


@dataclass(frozen=True)
class BenchEndpoints:
    dmm_resource: str
    supply_resource: str
    relay_port: str


class VirtualBench:
    """Serves a unit model on a fixture through simulated instruments."""

    def __init__(
        self,
        unit: UnitModel,
        fixture: FixtureMap,
        *,
        faults: list[Fault] | None = None,
        timing: Timing = Timing.INSTANT,
        line_hz: float = 50.0,
        seed: int = 0,
        state_file: Path | None = None,
        dmm_port: int = 0,
        supply_port: int = 0,
        relay_operate_s: float = 0.005,
        relay_release_s: float = 0.003,
    ) -> None:
        self.unit = unit
        self.fixture = fixture
        self.clock = BenchClock(timing)
        self.line_hz = line_hz
        self.state_file = state_file
        self._state_lock = threading.Lock()
        self.supply_settings = SupplySettings()
        self.relay_box = SimRelayBox(
            relay_count=fixture.relay_count,
            max_closed=fixture.max_closed,
            clock=self.clock,
            operate_s=relay_operate_s,
            release_s=relay_release_s,
            on_change=self._relays_changed,
        )
        self.probe = CircuitProbe(
            unit,
            fixture,
            self.relay_box.closed,
            self.supply_settings,
            self.clock,
            faults=faults,
            seed=seed,
        )
        self.dmm = SimDmm(
            self.probe, self.clock, identity=SIM_DMM_IDENTITY, line_hz=line_hz, seed=seed + 1
        )
        self.supply = SimSupply(
            self.probe,
            self.clock,
            name="supply",
            settings=self.supply_settings,
            identity=SIM_SUPPLY_IDENTITY,
            on_change=self.write_state,
        )
        self._dmm_server = ScpiTcpServer(self.dmm, name="virtual DMM", port=dmm_port)
        self._supply_server = ScpiTcpServer(self.supply, name="virtual supply", port=supply_port)
        self.endpoints: BenchEndpoints | None = None

    # --- life cycle ---------------------------------------------------------------------------

    def start(self) -> BenchEndpoints:
        self._dmm_server.start()
        self._supply_server.start()
        port = self.relay_box.start()
        self.endpoints = BenchEndpoints(
            self._dmm_server.resource, self._supply_server.resource, port
        )
        self.write_state()
        return self.endpoints

    def stop(self) -> None:
        self._dmm_server.stop()
        self._supply_server.stop()
        self.relay_box.stop()

    def __enter__(self) -> VirtualBench:
        self.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self.stop()

    # --- faults -------------------------------------------------------------------------------

    @property
    def faults(self) -> list[Fault]:
        return list(self.probe.faults)

    def set_faults(self, faults: list[Fault]) -> None:
        self.probe.set_faults(faults)
        self.write_state()

    def set_unit(self, unit: UnitModel, faults: list[Fault]) -> None:
        """Serve ``unit`` (on the same fixture, so the station file stays valid) with ``faults``
        from the next reading on."""
        self.unit = unit
        self.probe.set_unit(unit, faults)
        self.write_state()

    # --- state --------------------------------------------------------------------------------

    def _relays_changed(self) -> None:
        self.probe.relays_changed()
        self.write_state()

    def state(self) -> dict[str, object]:
        return {
            "closed_relays": sorted(self.relay_box.closed()),
            "outputs_on": ["supply"] if self.supply_settings.output_on else [],
            "faults": [f.spec for f in self.probe.faults],
            "watchdog_tripped": bool(self.relay_box.watchdog_tripped),
            "unit": self.unit.name,
        }

    def write_state(self) -> None:
        """Replace the state file atomically (write a temporary file, then rename)."""
        if self.state_file is None:
            return
        with self._state_lock:
            folder = self.state_file.parent
            folder.mkdir(parents=True, exist_ok=True)
            fd, tmp = tempfile.mkstemp(dir=folder, prefix=".bench-state-")
            with os.fdopen(fd, "w", encoding="utf-8") as handle:
                json.dump(self.state(), handle)
            os.replace(tmp, self.state_file)

    # --- station file -------------------------------------------------------------------------

    def station_toml(self, *, name: str = "virtual-bench", data_dir: str = "rig-data") -> str:
        """A station file for this bench (see docs/station-file.md)."""
        if self.endpoints is None:
            raise RuntimeError("start the bench before writing its station file")
        ep = self.endpoints
        fixture = self.fixture.path.resolve()
        return STATION_TEMPLATE.format(
            name=name,
            fixture=json.dumps(str(fixture)),
            line=f"{self.line_hz:g} Hz",
            data_dir=json.dumps(data_dir),
            dmm=ep.dmm_resource,
            supply=ep.supply_resource,
            relays=ep.relay_port,
        )

    def write_station(
        self, path: Path, *, data_dir: str | None = None, name: str = "virtual-bench"
    ) -> Path:
        """The station file that points at this bench.  ``name``: the station's name, kept with
        every run and its relay wear, so two benches written into one store keep theirs apart."""
        path = Path(path)
        path.parent.mkdir(parents=True, exist_ok=True)
        # the results land beside the station file unless told otherwise (an absolute path in
        # the file, so it does not matter where later commands are started)
        folder = Path(data_dir) if data_dir else path.parent
        text = self.station_toml(name=name, data_dir=str(folder.resolve()))
        path.write_text(text, encoding="utf-8")
        return path


# Accuracy figures: typical one-year specifications of a bench 6.5-digit DMM, from memory;
# the virtual DMM's own noise is well inside them.
STATION_TEMPLATE = """\
# Station file written by `rig sim` for a virtual bench.  Instrument figures are typical values,
# not those of any particular product.
[station]
name = "{name}"
fixture = {fixture}
line_frequency = "{line}"
data_dir = {data_dir}
watchdog = "2 s"

[dmm]
driver = "scpi-dmm"
resource = "{dmm}"
calibration_due = 2099-12-31
[dmm.settings]
timeout_ms = 3000

[[dmm.accuracy.dcv]]
range = "0.1 V"
pct_reading = 0.0050
pct_range = 0.0035
[[dmm.accuracy.dcv]]
range = "1 V"
pct_reading = 0.0040
pct_range = 0.0007
[[dmm.accuracy.dcv]]
range = "10 V"
pct_reading = 0.0035
pct_range = 0.0005
[[dmm.accuracy.dcv]]
range = "100 V"
pct_reading = 0.0045
pct_range = 0.0006
[[dmm.accuracy.dcv]]
range = "1000 V"
pct_reading = 0.0045
pct_range = 0.0010

[[dmm.accuracy.res2w]]
range = "100 ohm"
pct_reading = 0.010
pct_range = 0.004
[[dmm.accuracy.res2w]]
range = "1 kohm"
pct_reading = 0.010
pct_range = 0.001
[[dmm.accuracy.res2w]]
range = "10 kohm"
pct_reading = 0.010
pct_range = 0.001
[[dmm.accuracy.res2w]]
range = "100 kohm"
pct_reading = 0.010
pct_range = 0.001
[[dmm.accuracy.res2w]]
range = "1 Mohm"
pct_reading = 0.010
pct_range = 0.001
[[dmm.accuracy.res2w]]
range = "10 Mohm"
pct_reading = 0.040
pct_range = 0.001
[[dmm.accuracy.res2w]]
range = "100 Mohm"
pct_reading = 0.800
pct_range = 0.010

[[dmm.accuracy.res4w]]
range = "100 ohm"
pct_reading = 0.010
pct_range = 0.004
[[dmm.accuracy.res4w]]
range = "1 kohm"
pct_reading = 0.010
pct_range = 0.001
[[dmm.accuracy.res4w]]
range = "10 kohm"
pct_reading = 0.010
pct_range = 0.001
[[dmm.accuracy.res4w]]
range = "100 kohm"
pct_reading = 0.010
pct_range = 0.001
[[dmm.accuracy.res4w]]
range = "1 Mohm"
pct_reading = 0.010
pct_range = 0.001

[[dmm.accuracy.dci]]
range = "10 mA"
pct_reading = 0.050
pct_range = 0.020
[[dmm.accuracy.dci]]
range = "100 mA"
pct_reading = 0.050
pct_range = 0.005
[[dmm.accuracy.dci]]
range = "1 A"
pct_reading = 0.100
pct_range = 0.010
[[dmm.accuracy.dci]]
range = "3 A"
pct_reading = 0.120
pct_range = 0.020

[supply]
driver = "scpi-supply"
resource = "{supply}"
calibration_due = 2099-12-31
[supply.settings]
timeout_ms = 3000
[supply.accuracy.voltage]
range = "30 V"
pct_reading = 0.05
pct_range = 0.02
[supply.accuracy.current]
range = "1 A"
pct_reading = 0.1
pct_range = 0.05

[relay_box]
driver = "serial-relay-box"
resource = "{relays}"
calibration_due = 2099-12-31
[relay_box.settings]
timeout_ms = 500

# The thermometer in the well that reference-temperature steps read 4-wire.  Identity and date
# are invented for the virtual bench; class A is IEC 60751's +-(0.15 + 0.002 |t|) degC.
[reference_probe]
identity = "virtual Pt100 in the well, no. VB-0001 (invented)"
calibration_due = 2099-12-31
tolerance_class = "A"
"""
