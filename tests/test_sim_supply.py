"""The simulated supply, driven line by line; the load is small_bench's 100 ohm ("series")."""

from __future__ import annotations

import pytest
from small_bench import R_LOAD, SmallBench

from drivers.base import InstrumentIdentity
from rig.sim.probe import SupplySettings
from rig.sim.sim_supply import SimSupply
from rig.sim.timing import BenchClock

IDENTITY = InstrumentIdentity("Test Works", "PS-30", "0007", "1.4")


def make() -> tuple[SimSupply, SupplySettings, list[int]]:
    bench = SmallBench("series")
    changes: list[int] = []
    supply = SimSupply(
        bench,
        BenchClock(),
        name="psu",
        settings=bench.supply,
        identity=IDENTITY,
        on_change=lambda: changes.append(1),
    )
    return supply, bench.supply, changes


def ask(supply: SimSupply, line: str) -> str:
    reply = supply.handle(line)
    assert reply is not None, line
    return reply


def errors(supply: SimSupply) -> list[str]:
    found = []
    while not (reply := ask(supply, "SYST:ERR?")).startswith("0,"):
        found.append(reply)
    return found


def test_programming_changes_the_bench_settings_and_calls_on_change() -> None:
    supply, settings, changes = make()
    supply.handle("VOLT 5;CURR 0.2")  # same level after ';' (SCPI-1999 Vol. 1 §6.2.4)
    supply.handle("SOUR:VOLT:LEV:IMM:AMPL 6")
    supply.handle("OUTP ON")
    assert settings == SupplySettings(voltage_v=6.0, current_limit_a=0.2, output_on=True)
    assert len(changes) == 4
    assert ask(supply, "OUTP?") == "1"
    assert float(ask(supply, "VOLT?")) == 6.0
    assert errors(supply) == []


def test_readback_is_ohms_law_on_the_load() -> None:
    supply, _, _ = make()
    supply.handle("VOLT 5;CURR 1;:OUTP ON")
    assert float(ask(supply, "MEAS:VOLT?")) == pytest.approx(5.0)
    assert float(ask(supply, "MEAS:CURR?")) == pytest.approx(5.0 / R_LOAD)  # I = V / R


def test_current_limit_holds_the_current() -> None:
    # Constant-current operation: V = I_limit * R (Ohm's law) below the programmed voltage.
    supply, _, _ = make()
    supply.handle("VOLT 10;CURR 20 mA;:OUTP 1")
    assert float(ask(supply, "MEAS:CURR?")) == pytest.approx(0.02)
    assert float(ask(supply, "MEAS:VOLT?")) == pytest.approx(0.02 * R_LOAD)


def test_output_off_reads_zero_and_rst_turns_it_off() -> None:
    supply, settings, _ = make()
    supply.handle("VOLT 5;:OUTP ON")
    supply.handle("*RST")
    assert settings.output_on is False and ask(supply, "OUTP?") == "0"
    assert float(ask(supply, "MEAS:VOLT?")) == 0.0


@pytest.mark.parametrize(
    ("line", "code"),
    [
        ("VOLT 31", "-222"),  # SCPI-1999: -222 Data out of range
        ("CURR 5", "-222"),
        ("OUTP2 ON", "-114"),  # one output: suffix 2 is out of range
        ("OUTP MAYBE", "-224"),
        ("VOLT", "-109"),
        ("VOLT 5 A", "-131"),
    ],
)
def test_bad_settings_are_refused(line: str, code: str) -> None:
    supply, settings, _ = make()
    supply.handle(line)
    assert [e.split(",")[0] for e in errors(supply)] == [code]
    assert settings == SupplySettings()


def test_suffixes_and_min_max() -> None:
    supply, settings, _ = make()
    supply.handle("VOLT 2500 mV;CURR MAX")
    assert settings.voltage_v == pytest.approx(2.5) and settings.current_limit_a == 3.0


def test_trip_switches_the_output_off_and_queues_an_error() -> None:
    supply, settings, changes = make()
    supply.handle("VOLT 5;:OUTP ON")
    changes.clear()
    supply.inject_fault("trip")
    assert settings.output_on is False and supply.tripped
    assert ask(supply, "OUTP:PROT:TRIP?") == "1"
    assert changes == [1]
    assert errors(supply) == ['-300,"Device-specific error;over-current protection tripped"']
    supply.handle("OUTP ON")  # the trip was used up: the output stays on now
    assert settings.output_on and ask(supply, "OUTP:PROT:TRIP?") == "0"


def test_trip_armed_while_off_fires_when_the_output_is_switched_on() -> None:
    supply, settings, _ = make()
    supply.inject_fault("trip")
    assert errors(supply) == []
    supply.handle("OUTP ON")
    assert settings.output_on is False
    assert len(errors(supply)) == 1


def test_unknown_fault_kind_lists_trip() -> None:
    supply, _, _ = make()
    with pytest.raises(ValueError, match="trip"):
        supply.inject_fault("fire")
