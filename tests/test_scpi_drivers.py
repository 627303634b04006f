"""The SCPI drivers against the simulated instruments over real pyvisa-py TCP sockets on 127.0.0.1.

Nothing is mocked: each test starts a ``ScpiTcpServer`` and talks to it through pyvisa.  Circuit
values come from small_bench (Ohm's law and the divider rule, worked by hand).
"""

from __future__ import annotations

import math
import os
import signal
import socket
import statistics
import threading
import time
from collections.abc import Iterator
from dataclasses import dataclass

import pytest
from polling import wait_for
from small_bench import R_LEAD, R_LOAD, R_X, SmallBench

from drivers.base import InstrumentIdentity, MeterFunction
from drivers.scpi_dmm import DmmConfiguration, ScpiDmm
from drivers.scpi_supply import ScpiSupply
from drivers.visa_session import compound
from rig.errors import (
    ConfigError,
    InstrumentConnectionLost,
    InstrumentProtocolError,
    InstrumentReportedError,
    InstrumentTimeout,
    RigError,
    SettingRefused,
)
from rig.sim import sim_dmm
from rig.sim.scpi_server import MAX_LINE_BYTES, ScpiTcpServer
from rig.sim.sim_dmm import SimDmm
from rig.sim.sim_supply import SimSupply
from rig.sim.timing import BenchClock, Timing

DMM_ID = InstrumentIdentity("Test Works", "DM-6", "0001", "2.1")
PSU_ID = InstrumentIdentity("Test Works", "PS-30", "0007", "1.4")
FAST = {"timeout_ms": 300}


@dataclass
class Rig:
    bench: SmallBench
    dmm_sim: SimDmm
    psu_sim: SimSupply
    dmm_server: ScpiTcpServer
    psu_server: ScpiTcpServer


def start(hookup: str, timing: Timing = Timing.INSTANT, seed: int = 0) -> Rig:
    bench = SmallBench(hookup)
    clock = BenchClock(timing)
    dmm = SimDmm(bench, clock, identity=DMM_ID, seed=seed)
    psu = SimSupply(bench, clock, name="psu", settings=bench.supply, identity=PSU_ID)
    rig = Rig(bench, dmm, psu, ScpiTcpServer(dmm, name="dmm"), ScpiTcpServer(psu, name="psu"))
    rig.dmm_server.start()
    rig.psu_server.start()
    return rig


@pytest.fixture
def resistor() -> Iterator[Rig]:
    rig = start("resistor")
    yield rig
    rig.dmm_server.stop()
    rig.psu_server.stop()


@pytest.fixture
def series() -> Iterator[Rig]:
    rig = start("series")
    yield rig
    rig.dmm_server.stop()
    rig.psu_server.stop()


@pytest.fixture
def dmm(resistor: Rig) -> Iterator[ScpiDmm]:
    driver = ScpiDmm("dmm", resistor.dmm_server.resource, FAST)
    yield driver
    driver.close()


# ------------------------------------------------------------------------- DMM readings


def test_identity(dmm: ScpiDmm) -> None:
    assert dmm.identity() == DMM_ID  # IEEE 488.2-1992 §10.14: four fields


def test_two_wire_includes_the_leads_and_four_wire_removes_them(dmm: ScpiDmm) -> None:
    # Ohm's law on small_bench's resistor: 2-wire adds both leads, 4-wire does not.
    tolerance = 10 * (sim_dmm.noise_rms(1e3, 1.0) + sim_dmm.resolution(1e3, 1.0))
    dmm.configure(MeterFunction.RES_2W, 1000.0, 1.0)
    assert dmm.read() == pytest.approx(R_X + 2 * R_LEAD, abs=tolerance)
    dmm.configure(MeterFunction.RES_4W, 1000.0, 1.0)
    assert dmm.read() == pytest.approx(R_X, abs=tolerance)


def test_open_circuit_is_positive_infinity() -> None:
    rig = start("open")
    try:
        driver = ScpiDmm("dmm", rig.dmm_server.resource, FAST)
        driver.configure(MeterFunction.RES_2W, None, 1.0)
        assert driver.read() == math.inf  # 9.9E37 is overload (SCPI-1999)
        driver.close()
    finally:
        rig.dmm_server.stop()
        rig.psu_server.stop()


def test_supply_and_dmm_together_measure_ohms_law(series: Rig) -> None:
    # I = V / R through small_bench's 100 ohm load, read by the DMM in series.
    psu = ScpiSupply("psu", series.psu_server.resource, FAST)
    meter = ScpiDmm("dmm", series.dmm_server.resource, FAST)
    psu.reset()
    psu.set_voltage(5.0)
    psu.set_current_limit(1.0)
    psu.set_output(True)
    assert psu.output_is_on()
    meter.configure(MeterFunction.DC_CURRENT, 0.1, 10.0)
    assert meter.read() == pytest.approx(5.0 / R_LOAD, abs=1e-6)
    assert psu.measure_voltage() == pytest.approx(5.0)
    assert psu.measure_current() == pytest.approx(5.0 / R_LOAD)
    psu.set_output(False)
    assert not psu.output_is_on()
    assert series.bench.supply.output_on is False
    psu.close()
    meter.close()


def test_supply_switched_off_without_waiting_is_proven_by_its_read_back(series: Rig) -> None:
    psu = ScpiSupply("psu", series.psu_server.resource, FAST)
    psu.reset()
    psu.set_output(True)
    answered = series.psu_sim.lines_answered
    psu.send_output_off()  # sent, not waited for: no error query
    assert series.psu_sim.lines_answered == answered
    assert not psu.output_is_on()  # answered after the switch-off, in order
    assert series.bench.supply.output_on is False
    psu.close()


def test_a_change_of_function_sets_the_sample_count_along(resistor: Rig, dmm: ScpiDmm) -> None:
    # CONFigure resets the sample count on SCPI meters; the driver sets it to one in the same
    # program message, so the first READ? after a change of function needs no message before it.
    dmm.configure(MeterFunction.RES_2W, 1000.0, 1.0)
    assert resistor.dmm_sim.handle("SAMP:COUN?") == "1"
    before = resistor.dmm_sim.lines_handled
    dmm.read()
    assert resistor.dmm_sim.lines_handled == before + 1  # READ? alone
    dmm.read_many(3)  # another count: set first
    assert resistor.dmm_sim.lines_handled == before + 3
    dmm.configure(MeterFunction.RES_4W, 1000.0, 1.0)
    before = resistor.dmm_sim.lines_handled
    dmm.read()
    assert resistor.dmm_sim.lines_handled == before + 1


def test_integer_nplc_rejects_mains_and_half_nplc_does_not(dmm: ScpiDmm) -> None:
    # Seeded and with wide margins (see test_sim_dmm for the analytic figure); cannot flake.
    dmm.configure(MeterFunction.RES_4W, 1000.0, 1.0)
    whole = statistics.stdev(dmm.read_many(300))
    dmm.configure(MeterFunction.RES_4W, 1000.0, 0.5)
    half = statistics.stdev(dmm.read_many(300))
    pickup_ohm = sim_dmm.MAINS_PICKUP_V / 1e-3  # pickup volts over the 1 mA test current
    assert half == pytest.approx(2 / math.pi * pickup_ohm / math.sqrt(2), rel=0.25)
    assert whole < 0.2 * half


def test_read_many_returns_all_readings(dmm: ScpiDmm) -> None:
    dmm.configure(MeterFunction.RES_2W, 1000.0, 1.0)
    values = dmm.read_many(7)
    assert len(values) == 7 and all(abs(v - (R_X + 2 * R_LEAD)) < 0.1 for v in values)
    assert isinstance(dmm.read(), float)  # back to one reading
    with pytest.raises(RigError, match="positive whole count"):
        dmm.read_many(0)


def test_configure_is_recorded_and_a_repeat_is_skipped(resistor: Rig, dmm: ScpiDmm) -> None:
    dmm.configure(MeterFunction.RES_4W, 1000.0, 1.0)
    assert dmm.configuration == DmmConfiguration(MeterFunction.RES_4W, 1000.0, 1.0)
    assert resistor.dmm_sim.function is MeterFunction.RES_4W
    assert resistor.dmm_sim.range_in_use == 1000.0 and resistor.dmm_sim.nplc == 1.0
    before = resistor.dmm_sim.lines_handled
    dmm.configure(MeterFunction.RES_4W, 1000.0, 1.0)
    assert resistor.dmm_sim.lines_handled == before  # nothing sent
    dmm.configure(MeterFunction.RES_4W, 1000.0, 10.0)  # only the NPLC changes: no range command
    assert resistor.dmm_sim.nplc == 10.0
    assert resistor.dmm_sim.lines_handled == before + 2  # NPLC, then SYST:ERR?
    dmm.configure(MeterFunction.RES_4W, None, 10.0)
    assert resistor.dmm_sim.autorange
    dmm.reset()
    assert dmm.configuration is None


def test_bad_configure_arguments_are_clear_errors(dmm: ScpiDmm) -> None:
    with pytest.raises(RigError, match="range must be a positive number of ohm"):
        dmm.configure(MeterFunction.RES_2W, -5.0, 1.0)
    with pytest.raises(RigError, match="nplc"):
        dmm.configure(MeterFunction.DC_VOLTS, 10.0, float("nan"))


def test_instrument_refusal_after_configure_is_reported(resistor: Rig, dmm: ScpiDmm) -> None:
    resistor.dmm_sim.inject_fault("config_error")
    with pytest.raises(InstrumentReportedError) as caught:
        dmm.configure(MeterFunction.DC_VOLTS, 10.0, 1.0)
    assert caught.value.code == -221
    assert "Settings conflict" in str(caught.value)  # the instrument's own text (SCPI-1999)
    assert caught.value.instrument == "dmm"
    assert dmm.configuration is None
    dmm.configure(MeterFunction.DC_VOLTS, 10.0, 1.0)  # the queue was emptied: it works again
    assert dmm.configuration is not None


def test_a_setup_sent_ahead_is_taken_at_once_and_checked_later(resistor: Rig, dmm: ScpiDmm) -> None:
    # The first half sends the program message and waits for nothing; the meter takes it as it
    # arrives.  The error check comes with the second half, and only then is it recorded.
    before = resistor.dmm_sim.lines_handled
    dmm.send_configuration(MeterFunction.RES_2W, 1000.0, 1.0)
    assert dmm.configuration is None  # not yet known to be taken
    assert wait_for(lambda: resistor.dmm_sim.lines_handled == before + 1)
    assert resistor.dmm_sim.function is MeterFunction.RES_2W
    dmm.confirm_configuration()
    assert resistor.dmm_sim.lines_handled == before + 2  # the setup, then SYST:ERR?
    assert dmm.configuration == DmmConfiguration(MeterFunction.RES_2W, 1000.0, 1.0)
    dmm.confirm_configuration()  # nothing left to check: nothing sent
    assert resistor.dmm_sim.lines_handled == before + 2


def test_a_setup_refused_while_sent_ahead_is_reported_by_its_check(
    resistor: Rig, dmm: ScpiDmm
) -> None:
    resistor.dmm_sim.inject_fault("config_error")
    dmm.send_configuration(MeterFunction.DC_VOLTS, 10.0, 1.0)  # nothing raised yet
    with pytest.raises(InstrumentReportedError) as caught:
        dmm.confirm_configuration()
    assert caught.value.code == -221
    assert dmm.configuration is None
    dmm.configure(MeterFunction.DC_VOLTS, 10.0, 1.0)  # sent again in full, and taken
    assert dmm.configuration is not None


def test_out_of_range_request_is_reported_with_minus_222(dmm: ScpiDmm) -> None:
    with pytest.raises(InstrumentReportedError) as caught:
        dmm.configure(MeterFunction.DC_VOLTS, 5000.0, 1.0)
    assert caught.value.code == -222


def test_dialect_table_lets_another_spelling_work(resistor: Rig) -> None:
    settings = {
        "timeout_ms": 300,
        "dialect": {
            "configure": 'SENSe:FUNCtion "{function}"',
            "range": "SENSe:{function}:RANGe:UPPer {range}",
            "nplc": "SENSe:{function}:NPLCycles {nplc}",
            "read": "READ?",
            "func_res4w": "FRESistance",
        },
    }
    driver = ScpiDmm("dmm", resistor.dmm_server.resource, settings)
    driver.configure(MeterFunction.RES_4W, 1000.0, 1.0)
    assert driver.read() == pytest.approx(R_X, abs=0.05)
    driver.close()


def test_dialect_mistakes_are_config_errors(resistor: Rig) -> None:
    with pytest.raises(ConfigError, match="unknown command role"):
        ScpiDmm("dmm", resistor.dmm_server.resource, {"dialect": {"fire": "X"}})
    with pytest.raises(ConfigError, match="unknown placeholder"):
        ScpiDmm("dmm", resistor.dmm_server.resource, {"dialect": {"read": "READ? {count}"}})
    with pytest.raises(ConfigError, match="timeout_ms"):
        ScpiDmm("dmm", resistor.dmm_server.resource, {"timeout_ms": "soon"})


def test_non_numeric_reply_is_a_protocol_error(resistor: Rig) -> None:
    # A meter answering with something else than a number: here *IDN? stands in for READ?.
    driver = ScpiDmm("dmm", resistor.dmm_server.resource, {**FAST, "dialect": {"read": "*IDN?"}})
    with pytest.raises(InstrumentProtocolError, match="expected a number"):
        driver.read()
    driver.close()


# ------------------------------------------------------------------------- faults


def test_socket_closed_mid_read_is_connection_lost(resistor: Rig, dmm: ScpiDmm) -> None:
    resistor.dmm_sim.inject_fault("drop")
    with pytest.raises(InstrumentConnectionLost) as caught:
        dmm.read()
    assert caught.value.command == "READ?" and caught.value.resource == resistor.dmm_server.resource
    assert dmm.identity() == DMM_ID  # the next call reconnects


def test_reply_that_never_comes_is_a_timeout_and_the_next_query_works(
    resistor: Rig, dmm: ScpiDmm
) -> None:
    resistor.dmm_sim.inject_fault("silent")
    with pytest.raises(InstrumentTimeout, match="300 ms"):
        dmm.read()
    assert dmm.identity() == DMM_ID


def test_garbled_reply_is_a_protocol_error(resistor: Rig, dmm: ScpiDmm) -> None:
    resistor.dmm_sim.inject_fault("garble")
    with pytest.raises(InstrumentProtocolError, match="not ASCII"):
        dmm.read()
    assert dmm.identity() == DMM_ID


def test_after_a_timeout_a_late_reply_does_not_answer_the_next_query() -> None:
    # Real timing: a 20 NPLC reading at 50 Hz takes 0.4 s, longer than the 300 ms timeout, so its
    # reply arrives late.  Without resynchronisation *IDN? would get that reading (FIELD-NOTES).
    rig = start("resistor", Timing.REAL)
    try:
        rig.dmm_sim.handle("CONF:FRES 1000;:FRES:NPLC 20")
        driver = ScpiDmm("dmm", rig.dmm_server.resource, FAST)
        with pytest.raises(InstrumentTimeout):
            driver.read()
        assert driver.identity() == DMM_ID
        driver.close()
    finally:
        rig.dmm_server.stop()
        rig.psu_server.stop()


def test_after_ctrl_c_mid_query_the_late_reply_does_not_answer_the_next_query() -> None:
    # Ctrl-C while a 20 NPLC reading (0.4 s) integrates: its reply still comes, and would answer
    # the next query (at the end of a run, the read-back that proves the bench safe).
    rig = start("resistor", Timing.REAL)
    try:
        rig.dmm_sim.handle("CONF:FRES 1000;:FRES:NPLC 20")
        driver = ScpiDmm("dmm", rig.dmm_server.resource, {"timeout_ms": 2000})
        timer = threading.Timer(0.1, lambda: os.kill(os.getpid(), signal.SIGINT))
        timer.start()
        with pytest.raises(KeyboardInterrupt):
            driver.read()
        timer.join()
        time.sleep(0.5)  # the reading's reply has come by now
        assert driver.identity() == DMM_ID
        driver.close()
    finally:
        rig.dmm_server.stop()
        rig.psu_server.stop()


def test_nothing_listening_fails_at_the_first_io() -> None:
    # pyvisa-py 0.8.1 opens a port where nothing listens; the first I/O fails (FIELD-NOTES).
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        port = probe.getsockname()[1]
    driver = ScpiDmm("dmm", f"TCPIP::127.0.0.1::{port}::SOCKET", FAST)
    with pytest.raises(InstrumentConnectionLost) as caught:
        driver.identity()
    assert caught.value.command == "*IDN?"
    driver.close()


def test_bad_resource_string_is_a_clear_error() -> None:
    with pytest.raises(RigError, match="VISA resource"):
        ScpiDmm("dmm", "not a resource", FAST)


def test_supply_trip_is_reported_and_read_back(series: Rig) -> None:
    psu = ScpiSupply("psu", series.psu_server.resource, FAST)
    psu.reset()
    psu.set_voltage(5.0)
    psu.set_output(True)
    series.psu_sim.inject_fault("trip")
    assert psu.output_is_on() is False  # read back, not remembered
    with pytest.raises(InstrumentReportedError) as caught:
        psu.set_voltage(4.0)
    assert caught.value.code == -300 and "over-current" in str(caught.value)
    assert not isinstance(caught.value, SettingRefused)  # a device error: a trip, not a value
    # a refused value with a trip queued behind it is still reported as the trip it may be
    series.psu_sim.push_error(-300, "over-current protection tripped")  # as a trip queues it
    with pytest.raises(InstrumentReportedError) as both:
        psu.set_voltage(100.0)
    assert both.value.codes == (-300, -222)  # the queue is first in, first out (SCPI-1999)
    assert not isinstance(both.value, SettingRefused)
    psu.close()


def test_supply_refusal_and_bad_values(series: Rig) -> None:
    psu = ScpiSupply("psu", series.psu_server.resource, FAST)
    with pytest.raises(SettingRefused) as caught:
        psu.set_voltage(100.0)
    assert caught.value.code == -222  # SCPI-1999: Data out of range
    assert caught.value.command == "VOLT 100"
    with pytest.raises(RigError, match="volts must be a finite number"):
        psu.set_voltage(-1.0)
    with pytest.raises(RigError, match="True or False"):
        psu.set_output(1)  # type: ignore[arg-type]
    assert psu.identity() == PSU_ID
    psu.close()


# ------------------------------------------------------------------------- the server


def test_two_clients_never_interleave(resistor: Rig) -> None:
    drivers = [ScpiDmm(f"dmm{i}", resistor.dmm_server.resource, FAST) for i in range(2)]
    drivers[0].configure(MeterFunction.RES_4W, 1000.0, 1.0)
    failures: list[str] = []

    def worker(driver: ScpiDmm) -> None:
        for _ in range(200):
            if driver.identity() != DMM_ID:
                failures.append("identity")
            value = driver.read()
            if abs(value - R_X) > 0.05:
                failures.append(f"reading {value}")

    threads = [threading.Thread(target=worker, args=(d,)) for d in drivers]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert failures == []
    for d in drivers:
        d.close()


def test_server_survives_clients_that_vanish(resistor: Rig, dmm: ScpiDmm) -> None:
    for payload in (b"", b"*IDN?\n", b"READ?\nREA"):
        with socket.create_connection(("127.0.0.1", resistor.dmm_server.port)) as raw:
            raw.sendall(payload)
    assert dmm.identity() == DMM_ID


def test_unterminated_query_and_input_overrun_are_queued(resistor: Rig, dmm: ScpiDmm) -> None:
    with socket.create_connection(("127.0.0.1", resistor.dmm_server.port)) as raw:
        raw.sendall(b"MEAS:VOLT?")  # the link closes before the terminator
    # each link has its own server thread: let the first one's end be seen before the second
    deadline = time.monotonic() + 5.0
    while not len(resistor.dmm_sim.errors) and time.monotonic() < deadline:
        time.sleep(0.005)
    with socket.create_connection(("127.0.0.1", resistor.dmm_server.port)) as raw:
        raw.sendall(b"X" * (MAX_LINE_BYTES + 10) + b"\n*IDN?\n")
        assert raw.makefile("rb").readline() == b"Test Works,DM-6,0001,2.1\n"
    with pytest.raises(InstrumentReportedError) as caught:
        dmm.check_errors()
    # SCPI-1999: -420 Query UNTERMINATED, -363 Input buffer overrun, in the order they happened.
    assert caught.value.code == -420
    assert '-363,"Input buffer overrun"' in str(caught.value)


def test_stop_is_idempotent_and_closes_clients(resistor: Rig, dmm: ScpiDmm) -> None:
    assert dmm.identity() == DMM_ID
    resistor.dmm_server.stop()
    resistor.dmm_server.stop()
    with pytest.raises(InstrumentConnectionLost):
        dmm.identity()


def test_read_round_trip_is_fast() -> None:
    # Instant timing; the target is well under 1 ms median.  The bound asserted here is 20x looser
    # so that a loaded machine cannot make it flake; the measured median is logged.
    rig = start("resistor")
    try:
        driver = ScpiDmm("dmm", rig.dmm_server.resource, FAST)
        driver.configure(MeterFunction.RES_4W, 1000.0, 1.0)
        times = []
        for _ in range(200):
            t0 = time.perf_counter()
            driver.read()
            times.append(time.perf_counter() - t0)
        median_ms = statistics.median(times) * 1e3
        print(f"READ? median round trip {median_ms:.3f} ms")
        assert median_ms < 20.0
        driver.close()
    finally:
        rig.dmm_server.stop()
        rig.psu_server.stop()


def test_commands_join_into_one_program_message_at_the_root() -> None:
    # IEEE 488.2 §7.3: message units are joined by ';'.  In SCPI a unit after the first continues
    # the previous header's path unless it starts with ':' (SCPI-1999 Vol. 1, compound command
    # headers; from memory), so each later path header gets one; common commands and path-less
    # dialect headers go as they are.
    assert compound(["CONF:VOLT:DC", "VOLT:DC:RANG 10", "VOLT:DC:NPLC 1"]) == (
        "CONF:VOLT:DC;:VOLT:DC:RANG 10;:VOLT:DC:NPLC 1"
    )
    joined = compound(["CONF:RES", "*CLS", ":RES:NPLC 10", "F0R3"])
    assert joined == "CONF:RES;*CLS;:RES:NPLC 10;F0R3"
