"""The simulated DMM's front end, driven line by line (the socket path is in test_scpi_drivers).

Circuit values come from ``small_bench`` (Ohm's law and the divider rule, worked by hand).
"""

from __future__ import annotations

import math
import statistics

import pytest
from small_bench import DMM_INPUT_OHM, R_BOTTOM, R_LEAD, R_TOP, R_X, SmallBench, parallel

from drivers.base import InstrumentIdentity, MeterFunction
from rig.errors import RigError
from rig.sim import sim_dmm
from rig.sim.sim_dmm import SimDmm, mains_average
from rig.sim.timing import BenchClock, Timing

IDENTITY = InstrumentIdentity("Test Works", "DM-6", "0001", "2.1")


class RecordingClock(BenchClock):
    """Real timing whose waits are recorded instead of slept (the cost model, without the delay)."""

    def __init__(self) -> None:
        super().__init__(Timing.REAL)
        self.waited: list[float] = []

    def wait(self, seconds: float, *, since: float | None = None) -> None:
        self.waited.append(seconds)


def make(
    hookup: str = "resistor",
    *,
    clock: BenchClock | None = None,
    line_hz: float = 50.0,
    seed: int = 0,
) -> tuple[SimDmm, SmallBench]:
    bench = SmallBench(hookup)
    dmm = SimDmm(bench, clock or BenchClock(), identity=IDENTITY, line_hz=line_hz, seed=seed)
    return dmm, bench


def ask(dmm: SimDmm, line: str) -> str:
    reply = dmm.handle(line)
    assert reply is not None, line
    return reply


def errors(dmm: SimDmm) -> list[int]:
    codes = []
    while (code := int(ask(dmm, "SYST:ERR?").split(",")[0])) != 0:
        codes.append(code)
    return codes


def readings(dmm: SimDmm, line: str = "READ?") -> list[float]:
    return [float(x) for x in ask(dmm, line).split(",")]


def test_identity_and_reset_defaults() -> None:
    dmm, _ = make()
    assert ask(dmm, "*IDN?") == "Test Works,DM-6,0001,2.1"  # IEEE 488.2-1992 §10.14: four fields
    dmm.handle("CONF:RES 100;:SAMP:COUN 3")
    dmm.handle("*RST")
    assert dmm.function is MeterFunction.DC_VOLTS
    assert dmm.nplc == 10.0
    assert ask(dmm, "VOLT:RANG:AUTO?") == "1"
    assert ask(dmm, "SAMP:COUN?") == "1"
    assert errors(dmm) == []


def test_properties_are_read_only() -> None:
    dmm, _ = make()
    with pytest.raises(AttributeError):
        dmm.nplc = 1.0  # type: ignore[misc]


@pytest.mark.parametrize(
    ("function", "value", "expected"),
    [
        ("VOLT", "5", 10.0),
        ("VOLT", "0.1", 0.1),
        ("VOLT", "150 mV", 1.0),
        ("VOLT", "MAX", 1000.0),
        ("RES", "2.2 kOHM", 1e4),
        ("RES", "1 MOHM", 1e6),
        ("FRES", "MIN", 100.0),
        ("CURR", "20 mA", 0.1),
        ("CURR", "2", 3.0),
    ],
)
def test_range_selection_picks_the_smallest_range_that_holds_the_value(
    function: str, value: str, expected: float
) -> None:
    # Common practice, no published source: a range parameter is the largest expected reading.
    dmm, _ = make()
    dmm.handle(f"{function}:RANG {value}")
    assert float(ask(dmm, f"{function}:RANG?")) == expected
    assert ask(dmm, f"{function}:RANG:AUTO?") == "0"  # a fixed range turns autorange off
    assert errors(dmm) == []


def test_range_beyond_the_top_is_data_out_of_range() -> None:
    dmm, _ = make()
    dmm.handle("VOLT:RANG 1500")
    assert errors(dmm) == [-222]  # SCPI-1999 Vol. 2 §21.8: -222 Data out of range


def test_two_wire_and_four_wire_ohms() -> None:
    # Ohm's law on small_bench's resistor: 2-wire adds both leads, 4-wire senses at the part.
    dmm, _ = make("resistor")
    two = float(ask(dmm, "MEAS:RES? 1000"))
    four = float(ask(dmm, "MEAS:FRES? 1000"))
    noise = sim_dmm.noise_rms(1000.0, 10.0) + sim_dmm.resolution(1000.0, 10.0)
    assert two == pytest.approx(R_X + 2 * R_LEAD, abs=10 * noise)
    assert four == pytest.approx(R_X, abs=10 * noise)


def test_ohms_test_current_follows_the_range() -> None:
    # Typical 6½-digit DMM figures, from memory (see sim_dmm's docstring).
    dmm, bench = make("resistor")
    for range_, current in [(100, 1e-3), (1e3, 1e-3), (1e4, 1e-4), (1e5, 1e-5), (1e6, 5e-6)]:
        bench.test_currents.clear()
        dmm.handle(f"CONF:RES {range_:g};:READ?")
        assert bench.test_currents == [current]


def test_divider_voltage_including_meter_loading() -> None:
    # Divider rule with the meter's 10 Mohm input in parallel with the bottom resistor.
    dmm, bench = make("divider")
    bench.supply.voltage_v, bench.supply.output_on = 12.0, True
    expected = (
        12.0 * parallel(R_BOTTOM, DMM_INPUT_OHM) / (R_TOP + parallel(R_BOTTOM, DMM_INPUT_OHM))
    )
    assert float(ask(dmm, "MEAS:VOLT? 10")) == pytest.approx(expected, abs=1e-3)


def test_overload_beyond_120_percent_of_range() -> None:
    # 9.9E37 = overload (SCPI-1999); overrange to 120 % is common practice, no published source.
    dmm, bench = make("divider")
    bench.supply.output_on = True
    gain = parallel(R_BOTTOM, DMM_INPUT_OHM) / (R_TOP + parallel(R_BOTTOM, DMM_INPUT_OHM))
    bench.supply.voltage_v = 1.15 / gain  # 115 % of the 1 V range
    assert float(ask(dmm, "MEAS:VOLT? 1")) == pytest.approx(1.15, abs=1e-3)
    bench.supply.voltage_v = 1.25 / gain  # 125 %
    assert ask(dmm, "READ?") == "+9.90000000E+37"


def test_open_circuit_ohms_is_overload_and_autorange_goes_to_the_top() -> None:
    dmm, _ = make("open")
    assert ask(dmm, "MEAS:RES?") == "+9.90000000E+37"
    assert dmm.range_in_use == 1e8


def test_autorange_picks_the_range_and_once_holds_it() -> None:
    dmm, _ = make("resistor")
    dmm.handle("CONF:RES AUTO;:READ?")
    assert dmm.range_in_use == 1e4  # 1001 ohm is over the 1 kohm full scale
    dmm.handle("CONF:FRES;:FRES:RANG 1e6;:FRES:RANG:AUTO ONCE")
    assert dmm.range_in_use == 1e3 and ask(dmm, "FRES:RANG:AUTO?") == "0"


def test_function_by_string_and_per_function_settings() -> None:
    dmm, _ = make()
    dmm.handle('FUNC "FRES";:FRES:NPLC 1;:VOLT:NPLC 100')
    assert dmm.function is MeterFunction.RES_4W and dmm.nplc == 1.0
    dmm.handle('SENS:FUNC "volt:dc"')
    assert dmm.function is MeterFunction.DC_VOLTS and dmm.nplc == 100.0
    assert ask(dmm, "FUNC?") == '"VOLT"'
    dmm.handle('FUNC "VOLT:AC"')
    assert errors(dmm) == [-224]


def test_sample_count_and_fetch() -> None:
    # SCPI-1999 Vol. 1: READ? = INITiate + FETCh?; FETCh? returns the last acquisition again.
    dmm, _ = make("resistor")
    dmm.handle("CONF:FRES 1000;:SAMP:COUN 5")
    first = ask(dmm, "READ?")
    assert len(first.split(",")) == 5
    assert ask(dmm, "FETC?") == first
    dmm.handle("TRIG:COUN 2;:INIT")
    assert len(readings(dmm, "FETC?")) == 10


def test_fetch_with_nothing_acquired_is_data_stale() -> None:
    dmm, _ = make()
    dmm.handle("FETC?")
    dmm.handle("READ?;:VOLT:RANG 10;:FETC?")  # a configuration change discards the readings
    assert errors(dmm) == [-230, -230]  # SCPI-1999: -230 Data corrupt or stale


def test_nplc_limits() -> None:
    dmm, _ = make()
    dmm.handle("VOLT:NPLC 0.001")
    dmm.handle("VOLT:NPLC 1000")
    assert errors(dmm) == [-222, -222]
    dmm.handle("VOLT:NPLC 0.5")
    assert dmm.nplc == 0.5


def test_integrating_the_sinusoid_over_whole_cycles_gives_zero() -> None:
    # Mathematics: ∫ sin over N whole periods is 0; over half a period, 2/π·cos φ of the amplitude.
    for phase in (0.0, 0.7, 2.0, 4.5):
        assert mains_average(1.0, phase) == pytest.approx(0.0, abs=1e-12)
        assert mains_average(3.0, phase) == pytest.approx(0.0, abs=1e-12)
        assert mains_average(0.5, phase) == pytest.approx(2 / math.pi * math.cos(phase))


def test_integer_nplc_rejects_mains_pickup_and_half_nplc_does_not() -> None:
    # Seeded, so it is deterministic; margins are wide enough that any seed would pass.
    dmm, bench = make("divider", seed=7)
    bench.supply.voltage_v, bench.supply.output_on = 5.0, True
    dmm.handle("CONF:VOLT 10;:VOLT:NPLC 1;:SAMP:COUN 400")
    whole = statistics.stdev(readings(dmm))
    dmm.handle("VOLT:NPLC 0.5")
    half = statistics.stdev(readings(dmm))
    # At 0.5 NPLC the pickup averages to (2/π)·A·cos φ: rms (2/π)·A/√2 = 0.45·A (mathematics).
    expected_half = 2 / math.pi * sim_dmm.MAINS_PICKUP_V / math.sqrt(2)
    assert half == pytest.approx(expected_half, rel=0.25)
    # At 1 NPLC only white noise and resolution remain: far below the pickup.
    assert whole < 0.2 * half
    assert whole < 3 * (sim_dmm.noise_rms(10.0, 1.0) + sim_dmm.resolution(10.0, 1.0))


def test_noise_shrinks_with_the_square_root_of_integration_time() -> None:
    dmm, bench = make("divider", seed=3)
    bench.supply.voltage_v, bench.supply.output_on = 5.0, True
    dmm.handle("CONF:VOLT 10;:VOLT:NPLC 1;:SAMP:COUN 400")
    at_1 = statistics.stdev(readings(dmm))
    dmm.handle("VOLT:NPLC 100")
    at_100 = statistics.stdev(readings(dmm))
    assert at_1 / at_100 == pytest.approx(10.0, rel=0.35)  # white noise ∝ 1/√NPLC


@pytest.mark.parametrize(("line_hz", "nplc"), [(50.0, 10.0), (60.0, 10.0), (50.0, 0.5)])
def test_reading_costs_its_integration_time(line_hz: float, nplc: float) -> None:
    clock = RecordingClock()
    dmm, _ = make("resistor", clock=clock, line_hz=line_hz)
    dmm.handle(f"CONF:FRES 1000;:FRES:NPLC {nplc};:SAMP:COUN 3")
    clock.waited.clear()
    dmm.handle("READ?")
    per_reading = nplc / line_hz + sim_dmm.READING_OVERHEAD_S  # one line cycle is 1/line_hz s
    assert clock.waited == pytest.approx([per_reading] * 3)


def test_autorange_change_costs_extra_time() -> None:
    clock = RecordingClock()
    dmm, _ = make("resistor", clock=clock)
    dmm.handle("CONF:FRES 1e6;:FRES:RANG:AUTO ON")
    clock.waited.clear()
    dmm.handle("READ?")
    assert sum(clock.waited) == pytest.approx(
        sim_dmm.AUTORANGE_COST_S + 10 / 50 + sim_dmm.READING_OVERHEAD_S
    )
    clock.waited.clear()
    dmm.handle("READ?")  # range already right: no autorange cost
    assert sum(clock.waited) == pytest.approx(10 / 50 + sim_dmm.READING_OVERHEAD_S)


def test_config_error_fault() -> None:
    dmm, _ = make()
    dmm.inject_fault("config_error")
    dmm.handle("CONF:VOLT 1")
    assert errors(dmm) == [-221]  # SCPI-1999: -221 Settings conflict
    assert dmm.range_in_use == 10.0  # the refused configure changed nothing
    dmm.handle("CONF:VOLT 1")
    assert errors(dmm) == [] and dmm.range_in_use == 1.0


def test_garble_and_counted_faults() -> None:
    dmm, _ = make()
    dmm.inject_fault("garble", count=2)
    assert not ask(dmm, "*IDN?").isascii()
    assert not ask(dmm, "*IDN?").isascii()
    assert ask(dmm, "*IDN?").isascii()
    dmm.inject_fault("silent", count=None)
    assert dmm.transport_fault("*CLS") is None  # a command is never affected
    assert [dmm.transport_fault("*IDN?") for _ in range(3)] == ["silent"] * 3
    dmm.clear_faults()
    assert dmm.transport_fault("*IDN?") is None


def test_unknown_fault_kind_lists_the_known_ones() -> None:
    dmm, _ = make()
    with pytest.raises(ValueError, match="drop, silent, garble, config_error"):
        dmm.inject_fault("smoke")
    with pytest.raises(ValueError, match="positive integer"):
        dmm.inject_fault("drop", count=0)


def test_bad_line_frequency_is_a_clear_error() -> None:
    with pytest.raises(RigError, match="line_hz"):
        SimDmm(SmallBench(), BenchClock(), identity=IDENTITY, line_hz=0)
