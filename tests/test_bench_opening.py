"""Opening a bench proves each instrument is there and is the one the station names, before any
run is recorded against a unit.

Real stacks throughout: the virtual bench's DMM and supply over TCP (pyvisa-py), its relay box on a
pty (pyserial), a port where nothing listens, a socket where another service answers, and the
station's real SQLite file.  *IDN? answers four comma-separated fields: maker, model, serial,
firmware (IEEE 488.2-1992 §10.14).
"""

from __future__ import annotations

import socket
import socketserver
import threading
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

import pytest
from bench_helpers import shipped_bench, shipped_plan
from test_scpi_drivers import DMM_ID, FAST
from test_scpi_drivers import start as start_small_bench

from drivers.scpi_dmm import ScpiDmm
from rig.bench_identity import BenchRefused
from rig.bench_open import close_bench, open_bench
from rig.config.station import Station
from rig.engine import Engine
from rig.errors import InstrumentConnectionLost, InstrumentUnreachable
from rig.instrument_faults import plain_reason
from rig.runner import run_plan
from rig.store import ResultStore


@contextmanager
def nothing_listening() -> Iterator[int]:
    """A port on 127.0.0.1 held bound but not listening: a connection to it is refused."""
    held = socket.socket(socket.AF_INET, socket.SOCK_STREAM)
    held.bind(("127.0.0.1", 0))
    try:
        yield held.getsockname()[1]
    finally:
        held.close()


class _WebLike(socketserver.StreamRequestHandler):
    """Another service at the address: it answers any line with an HTTP error, then closes."""

    def handle(self) -> None:
        self.rfile.readline()
        self.wfile.write(b"HTTP/1.1 400 Bad Request\r\nconnection: close\r\n\r\n")


@contextmanager
def another_service() -> Iterator[int]:
    server = socketserver.ThreadingTCPServer(("127.0.0.1", 0), _WebLike)
    server.daemon_threads = True
    thread = threading.Thread(target=server.serve_forever, daemon=True)
    thread.start()
    try:
        yield server.server_address[1]
    finally:
        server.shutdown()
        server.server_close()


def _socket(port: int) -> str:
    return f"TCPIP::127.0.0.1::{port}::SOCKET"


def _no_runs(station: Station) -> bool:
    store = ResultStore(station.store_path)
    try:
        return store.runs() == []
    finally:
        store.close()


@pytest.mark.parametrize(("role", "who"), [("dmm", "the DMM"), ("supply", "the supply")])
def test_an_instrument_that_is_off_refuses_the_bench_before_any_run(
    tmp_path: Path, role: str, who: str
) -> None:
    with (
        shipped_bench("ntc-sender", folder=tmp_path) as (bench, station),
        nothing_listening() as port,
    ):
        station.instruments[role].resource = _socket(port)
        with pytest.raises(BenchRefused) as refused:
            run_plan(shipped_plan("ntc-sender-screen", station), "OFF-1", ask=lambda t: True)
        assert not any(bench.relay_box.operation_counts().values())  # nothing moved
        assert _no_runs(station)  # nothing charged to the unit
    text = str(refused.value)
    assert f"[{role}] at {_socket(port)}" in text
    assert f"nothing answers at 127.0.0.1:{port} (connection refused)" in text
    assert f"is {who} on and is the address right?" in text
    assert "lost" not in text  # a connection never made was not lost
    assert str(station.path) in text


def test_a_meter_gone_mid_run_is_said_in_the_words_of_the_opening() -> None:
    # the meter answered, then went off: once its link is found lost, the next command finds
    # nothing at the address, said as the opening says it (address and question alike)
    bench = start_small_bench("resistor")
    meter = ScpiDmm("dmm", bench.dmm_server.resource, FAST)
    try:
        assert meter.identity() == DMM_ID
        address = bench.dmm_server.resource.split("::")[1:3]
        bench.dmm_server.stop()
        with pytest.raises(InstrumentConnectionLost):
            meter.identity()  # the socket was reset: lost
        with pytest.raises(InstrumentUnreachable) as refused:
            meter.identity()  # opened again: refused
    finally:
        meter.close()
        bench.psu_server.stop()
    text = plain_reason(refused.value)
    assert text.startswith(
        f"nothing answers at {':'.join(address)}: is the DMM on and is the address right? "
        "(details: connection refused, instrument dmm, "
    )


def test_another_service_at_the_address_is_not_taken_for_the_meter(tmp_path: Path) -> None:
    with (
        shipped_bench("ntc-sender", folder=tmp_path) as (_bench, station),
        another_service() as port,
    ):
        station.instruments["dmm"].resource = _socket(port)
        with pytest.raises(BenchRefused) as refused:
            run_plan(shipped_plan("ntc-sender-screen", station), "WEB-1", ask=lambda t: True)
        assert _no_runs(station)
    text = str(refused.value)
    assert "does not say who it is as an instrument does" in text
    assert "four comma-separated fields" in text and "is the address of the DMM right?" in text


def test_the_run_records_the_identities_read_at_opening_and_asks_none(tmp_path: Path) -> None:
    with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
        asked: list[str] = []
        opened = open_bench(station)
        handle = bench.dmm.handle

        def counting(line: str) -> str | None:
            asked.append(line)
            return handle(line)

        bench.dmm.handle = counting  # type: ignore[method-assign]
        store = ResultStore(station.store_path)
        try:
            plan = shipped_plan("ntc-sender-screen", station)
            summary = Engine(plan, opened, store, ask=lambda t: True).run("REC-1")
            instruments = store.run(summary.run_id)["instruments"]
        finally:
            store.close()
            close_bench(opened)
    assert summary.status == "complete", summary.reason
    assert "VB-DMM-0001" in str(instruments) and "VB-PSU-0001" in str(instruments)
    assert asked and not any("IDN" in line.upper() for line in asked)


def test_expect_identity_matches_any_part_of_the_reply_letter_case_aside(tmp_path: Path) -> None:
    with shipped_bench("ntc-sender", folder=tmp_path) as (_bench, station):
        station.instruments["dmm"].expect_identity = "vb-dmm-0001"  # the serial, in lower case
        station.instruments["supply"].expect_identity = "virtual-supply"  # the model
        opened = open_bench(station)
        close_bench(opened)
        station.instruments["dmm"].expect_identity = "VB-DMM-0002"  # another meter's serial
        with pytest.raises(BenchRefused) as refused:
            open_bench(station)
    text = str(refused.value)
    assert "[dmm] at" in text and "does not contain expect_identity 'VB-DMM-0002'" in text
    assert "'rig,virtual-dmm,VB-DMM-0001,1.0'" in text


def test_swapped_addresses_are_named_as_swapped(tmp_path: Path) -> None:
    with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
        dmm, supply = station.instruments["dmm"], station.instruments["supply"]
        dmm.expect_identity, supply.expect_identity = "VB-DMM-0001", "VB-PSU-0001"
        dmm.resource, supply.resource = supply.resource, dmm.resource
        with pytest.raises(BenchRefused) as refused:
            run_plan(shipped_plan("ntc-sender-screen", station), "SWAP-1", ask=lambda t: True)
        assert _no_runs(station)
        assert not any(bench.relay_box.operation_counts().values())
    text = str(refused.value)
    assert "[dmm] at" in text and "answers as the station's supply" in text
    assert "[supply] at" in text and "answers as the station's dmm" in text
    assert "swapped" in text


def test_two_roles_at_one_address_are_refused_without_expect_identity(tmp_path: Path) -> None:
    with shipped_bench("ntc-sender", folder=tmp_path) as (_bench, station):
        station.instruments["supply"].resource = station.instruments["dmm"].resource
        with pytest.raises(BenchRefused, match=r"\[supply\] at .*same instrument as the dmm"):
            open_bench(station)


def test_errors_left_in_the_meter_are_a_note_of_the_run_not_a_fault_of_its_first_step(
    tmp_path: Path,
) -> None:
    # Another program left an undefined header in the meter (SCPI-1999: -113 "Undefined header";
    # the queue holds it until read, IEEE 488.2 *CLS or SYST:ERR? empties it).
    with shipped_bench("ntc-sender", folder=tmp_path) as (_bench, station):
        port = int(station.instruments["dmm"].resource.split("::")[2])
        with socket.create_connection(("127.0.0.1", port), timeout=5) as other:
            other.sendall(b"BOGUS:HEADER 1\n*OPC?\n")
            assert other.makefile("rb").readline().strip() == b"1"  # the meter took both
        summary = run_plan(shipped_plan("ntc-sender-screen", station), "Q-1", ask=lambda t: True)
    assert summary.status == "complete", summary.reason
    assert not any("retry" in n for n in summary.notes), summary.notes
    assert not summary.warnings, summary.warnings
    held = [n for n in summary.notes if "error queue held" in n]
    assert held and '-113,"Undefined header"' in held[0] and "before this run" in held[0]


@pytest.mark.parametrize(
    ("key", "more", "shown"),
    [("relay_count", 8, "relay_count = {}"), ("max_closed", 2, "max_closed = {}")],
)
def test_a_fixture_bigger_than_the_relay_box_is_refused_at_opening(
    tmp_path: Path, key: str, more: int, shown: str
) -> None:
    # The virtual box is built to the fixture's size; the station's fixture map then claims more
    # than the box answers to WHO (docs/relay-box-protocol.md).
    with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
        has = getattr(station.fixture, key)
        setattr(station.fixture, key, has + more)
        with pytest.raises(BenchRefused) as refused:
            run_plan(shipped_plan("ntc-sender-screen", station), "BOX-1", ask=lambda t: True)
        assert not any(bench.relay_box.operation_counts().values())
        assert _no_runs(station)
    text = str(refused.value)
    assert "[relay_box] at" in text and shown.format(has + more) in text
    assert str(station.fixture.path) in text
    assert f"the box reports {bench.relay_box.relay_count} relays" in text


def test_a_relay_box_whose_id_is_not_four_fields_is_refused_at_opening(tmp_path: Path) -> None:
    # A box's WHO answer names it in four comma-separated fields (docs/relay-box-protocol.md,
    # modelled on IEEE 488.2's *IDN?): a record must name every instrument, so a box that does
    # not is refused before any run, in words about its own protocol, not the SCPI standard's.
    with shipped_bench("ntc-sender", folder=tmp_path) as (bench, station):
        bench.relay_box.identity = "DocBox16 v0.1"
        with pytest.raises(BenchRefused) as refused:
            run_plan(shipped_plan("ntc-sender-screen", station), "ID-1", ask=lambda t: True)
        assert _no_runs(station)
    text = str(refused.value)
    assert "[relay_box] at" in text and "WHO answer's id= needs four" in text, text
    assert "IEEE 488.2" not in text
