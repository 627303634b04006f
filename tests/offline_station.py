"""A station file for planning and loading tests: the virtual bench's template with instrument
resources nobody opens."""

from __future__ import annotations

import json
from pathlib import Path

from rig.sim.bench import STATION_TEMPLATE


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
