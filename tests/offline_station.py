"""A station file for planning and loading tests: the virtual bench's template with instrument
resources nobody opens."""

from __future__ import annotations

import json
from pathlib import Path

from rig.config.station import Station, load_station
from rig.sim.bench import STATION_TEMPLATE

DEMO_FIXTURE = Path(__file__).resolve().parent.parent / "sequences" / "demo-fixture.toml"


def offline_station_text(name: str, fixture: Path, data_dir: Path) -> str:
    """Station-file text naming ``fixture``, with a DMM, supply and relay box that are never
    reached (planning and validation only)."""
    return STATION_TEMPLATE.format(
        name=name,
        fixture=json.dumps(str(fixture)),
        line="50 Hz",
        data_dir=json.dumps(str(data_dir)),
        dmm="TCPIP::127.0.0.1::1::SOCKET",
        supply="TCPIP::127.0.0.1::2::SOCKET",
        relays="/dev/null",
    )


def offline_demo_station(name: str, folder: Path) -> Station:
    """The demo fixture on an offline station, written into ``folder`` and loaded."""
    path = folder / "station.toml"
    path.write_text(offline_station_text(name, DEMO_FIXTURE, folder / "rig-data"), encoding="utf-8")
    return load_station(path)
