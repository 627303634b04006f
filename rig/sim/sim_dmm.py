"""A simulated bench DMM: SCPI front panel, ranges, noise, mains pickup and integration time.

It knows nothing of the circuit: every reading asks the ``BenchProbe`` for the noiseless value at
that moment and then adds what a real front end adds, so sequences and limits can be proven against
realistic readings (overload, noise that shrinks with NPLC, mains pickup a fractional NPLC lets in).

Figures (typical of a 6½-digit bench DMM, from memory; no published source is claimed):
ranges DCV 0.1/1/10/100/1000 V, ohms 100 Ω .. 100 MΩ, DCI 10 mA .. 3 A; overrange to 120 % of range;
ohms test current 1 mA (100 Ω, 1 kΩ), 100 µA (10 kΩ), 10 µA (100 kΩ), 5 µA (1 MΩ), 500 nA (10 MΩ,
100 MΩ); white noise 2 ppm of range rms at 1 NPLC, ∝ 1/sqrt(NPLC); resolution 1 ppm of range at
1 NPLC, ∝ 1/sqrt(NPLC), never finer than 0.1 ppm; 0.5 mV peak (0.5 µA for DCI) mains pickup;
a reading costs NPLC/line_hz + 1 ms, and a range change by autorange 5 ms more.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, replace
from functools import partial

import numpy as np

from drivers.base import InstrumentIdentity, MeterFunction
from rig.errors import RigError
from rig.sim.probe import BenchProbe
from rig.sim.scpi import Call, ScpiInstrument, format_reading, matches_pattern
from rig.sim.scpi_errors import ScpiError
from rig.sim.timing import BenchClock

log = logging.getLogger(__name__)

#: What a bench DMM sends for an overload (SCPI-1999: 9.9E37 is +infinity).
OVERLOAD = 9.9e37
OVERRANGE_FACTOR = 1.2
NOISE_PPM_AT_1_NPLC = 2.0
RESOLUTION_PPM_AT_1_NPLC = 1.0
FINEST_RESOLUTION_PPM = 0.1
MAINS_PICKUP_V = 0.5e-3
MAINS_PICKUP_A = 0.5e-6
READING_OVERHEAD_S = 1e-3
AUTORANGE_COST_S = 5e-3
NPLC_MIN, NPLC_MAX, NPLC_DEFAULT = 0.02, 100.0, 10.0
COUNT_MAX = 50_000


@dataclass(frozen=True)
class FunctionSpec:
    """How one measurement function looks on the front panel."""

    function: MeterFunction
    header: str  # the SCPI node, e.g. "VOLTage[:DC]"
    name: str  # what FUNCtion? and CONFigure? answer
    unit: str
    ranges: tuple[float, ...]
    default_range: float
    test_current_a: tuple[float, ...] = ()  # per range, resistance functions only

    def test_current(self, range_: float) -> float:
        if not self.test_current_a:
            return 0.0
        return self.test_current_a[self.ranges.index(range_)]

    def pickup_amplitude(self, range_: float) -> float:
        """Peak mains pickup in this function's unit on ``range_``."""
        if self.function is MeterFunction.DC_CURRENT:
            return MAINS_PICKUP_A
        if self.test_current_a:
            return MAINS_PICKUP_V / self.test_current(range_)
        return MAINS_PICKUP_V


_OHM_RANGES = (1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8)
_OHM_CURRENTS = (1e-3, 1e-3, 1e-4, 1e-5, 5e-6, 5e-7, 5e-7)

SPECS: dict[MeterFunction, FunctionSpec] = {
    MeterFunction.DC_VOLTS: FunctionSpec(
        MeterFunction.DC_VOLTS, "VOLTage[:DC]", "VOLT", "V", (0.1, 1.0, 10.0, 100.0, 1000.0), 10.0
    ),
    MeterFunction.RES_2W: FunctionSpec(
        MeterFunction.RES_2W, "RESistance", "RES", "OHM", _OHM_RANGES, 1e3, _OHM_CURRENTS
    ),
    MeterFunction.RES_4W: FunctionSpec(
        MeterFunction.RES_4W, "FRESistance", "FRES", "OHM", _OHM_RANGES, 1e3, _OHM_CURRENTS
    ),
    MeterFunction.DC_CURRENT: FunctionSpec(
        MeterFunction.DC_CURRENT, "CURRent[:DC]", "CURR", "A", (0.01, 0.1, 1.0, 3.0), 0.1
    ),
}


def mains_average(nplc: float, phase: float) -> float:
    """Mean of sin(2π·t/T_line + phase) over an aperture of ``nplc`` line cycles.

    ∫ sin over the window / window = (cos φ - cos(2πN + φ)) / (2πN): zero for whole N.
    """
    return (math.cos(phase) - math.cos(2 * math.pi * nplc + phase)) / (2 * math.pi * nplc)


def resolution(range_: float, nplc: float) -> float:
    ppm = max(FINEST_RESOLUTION_PPM, RESOLUTION_PPM_AT_1_NPLC / math.sqrt(nplc))
    return range_ * ppm * 1e-6


def noise_rms(range_: float, nplc: float) -> float:
    return range_ * NOISE_PPM_AT_1_NPLC * 1e-6 / math.sqrt(nplc)


@dataclass
class _Setup:
    """Per-function settings, as a bench DMM keeps them while you switch functions."""

    range_: float
    auto: bool = True
    nplc: float = NPLC_DEFAULT


class SimDmm(ScpiInstrument):
    """A SCPI DMM on a ``BenchProbe``; serve it with ``ScpiTcpServer``."""

    def __init__(
        self,
        probe: BenchProbe,
        clock: BenchClock,
        *,
        identity: InstrumentIdentity,
        line_hz: float = 50.0,
        seed: int = 0,
    ) -> None:
        if not (isinstance(line_hz, int | float) and line_hz > 0):
            raise RigError(f"line_hz must be a positive frequency in Hz, got {line_hz!r}")
        super().__init__(identity)
        self.probe = probe
        self.clock = clock
        self.line_hz = float(line_hz)
        self._rng = np.random.default_rng(seed)
        self._function = MeterFunction.DC_VOLTS
        self._setups: dict[MeterFunction, _Setup] = {}
        self._sample_count = 1
        self._trigger_count = 1
        self._readings: list[float] | None = None
        self._arrived: float | None = None
        """When the message being handled arrived (``clock.mark()``); None between messages."""
        self.reset_device()
        self._register()

    # ----------------------------------------------------------------- read-only state

    @property
    def function(self) -> MeterFunction:
        return self._function

    @property
    def range_in_use(self) -> float:
        """The range of the active function (the one autorange last chose, if it is on)."""
        return self._setups[self._function].range_

    @property
    def nplc(self) -> float:
        return self._setups[self._function].nplc

    @property
    def autorange(self) -> bool:
        return self._setups[self._function].auto

    # ----------------------------------------------------------------- state changes

    def reset_device(self) -> None:
        """*RST: DC volts, autorange, 10 NPLC, one reading per trigger, no readings kept."""
        self._function = MeterFunction.DC_VOLTS
        self._setups = {f: _Setup(spec.default_range) for f, spec in SPECS.items()}
        self._sample_count = 1
        self._trigger_count = 1
        self._readings = None

    def _configuring(self) -> None:
        """Called before any change of measurement configuration."""
        if self._take_fault("config_error"):
            raise ScpiError(-221, "injected fault")
        self._readings = None

    # ----------------------------------------------------------------- command table

    def _register(self) -> None:
        add = self.tree.add
        for spec in SPECS.values():
            h = spec.header
            add(f"CONFigure:{h}", on_set=partial(self._configure, spec=spec))
            add(f"MEASure:{h}?", on_query=partial(self._measure, spec=spec))
            add(
                f"[SENSe:]{h}:RANGe[:UPPer]",
                on_set=partial(self._range_set, spec=spec),
                on_query=partial(self._range_query, spec=spec),
            )
            add(
                f"[SENSe:]{h}:RANGe:AUTO",
                on_set=partial(self._auto_set, spec=spec),
                on_query=partial(self._auto_query, spec=spec),
            )
            add(
                f"[SENSe:]{h}:NPLCycles",
                on_set=partial(self._nplc_set, spec=spec),
                on_query=partial(self._nplc_query, spec=spec),
            )
        add("CONFigure?", on_query=self._configure_query)
        add("[SENSe:]FUNCtion[:ON]", on_set=self._function_set, on_query=self._function_query)
        add("SAMPle:COUNt", on_set=self._sample_set, on_query=self._sample_query)
        add("TRIGger:COUNt", on_set=self._trigger_set, on_query=self._trigger_query)
        add("READ?", on_query=self._read)
        add("INITiate[:IMMediate]", on_set=self._initiate)
        add("FETCh?", on_query=self._fetch)
        add("ABORt", on_set=self._abort)

    # ----------------------------------------------------------------- handlers: configuration

    def _range_for(self, spec: FunctionSpec, value: float) -> float:
        """The smallest range that holds ``value``; -222 beyond the top range's overrange."""
        magnitude = abs(value)
        if magnitude > spec.ranges[-1] * OVERRANGE_FACTOR:
            raise ScpiError(-222, f"largest range is {spec.ranges[-1]:g} {spec.unit}")
        return next((r for r in spec.ranges if magnitude <= r), spec.ranges[-1])

    def _apply_range(self, spec: FunctionSpec, setup: _Setup, v: float | str) -> None:
        if v in ("AUTO", "DEFAULT"):
            setup.auto = True
        elif v == "MINIMUM":
            setup.range_, setup.auto = spec.ranges[0], False
        elif v == "MAXIMUM":
            setup.range_, setup.auto = spec.ranges[-1], False
        else:
            assert isinstance(v, float)
            setup.range_, setup.auto = self._range_for(spec, v), False

    def _nplc_for_resolution(self, spec: FunctionSpec, setup: _Setup, v: float | str) -> float:
        if v == "DEFAULT":
            return NPLC_DEFAULT
        if v == "MINIMUM":
            return NPLC_MAX  # finest resolution
        if v == "MAXIMUM":
            return NPLC_MIN
        assert isinstance(v, float)
        if v <= 0:
            raise ScpiError(-222, "resolution must be positive")
        for nplc in (NPLC_MIN, 0.2, 1.0, 10.0, NPLC_MAX):
            if resolution(setup.range_ if not setup.auto else spec.ranges[-1], nplc) <= v:
                return nplc
        return NPLC_MAX

    def _configure(self, call: Call, spec: FunctionSpec) -> None:
        """CONFigure:<func> [range|AUTO|MIN|MAX|DEF[,resolution|MIN|MAX|DEF]] (SCPI-1999 Vol. 2)."""
        call.count(0, 2)
        words = ("AUTO", "MINimum", "MAXimum", "DEFault")
        rng = call.value(0, unit=spec.unit, words=words) if call.has(0) else "DEFAULT"
        res = (
            call.value(1, unit=spec.unit, words=("MINimum", "MAXimum", "DEFault"))
            if call.has(1)
            else "DEFAULT"
        )
        setup = _Setup(self._setups[spec.function].range_)
        self._apply_range(spec, setup, rng)
        setup.nplc = self._nplc_for_resolution(spec, setup, res)
        self._configuring()
        self._function = spec.function
        self._setups[spec.function] = setup
        self._sample_count = 1
        self._trigger_count = 1

    def _measure(self, call: Call, spec: FunctionSpec) -> str:
        self._configure(call, spec)
        return self._read(Call("READ?", True, ()))

    def _configure_query(self, call: Call) -> str:
        call.count(0, 0)
        spec = SPECS[self._function]
        setup = self._setups[self._function]
        return (
            f'"{spec.name} {format_reading(setup.range_)},'
            f'{format_reading(resolution(setup.range_, setup.nplc))}"'
        )

    def _range_set(self, call: Call, spec: FunctionSpec) -> None:
        call.count(1, 1)
        v = call.value(0, unit=spec.unit)
        setup = replace(self._setups[spec.function])
        if v == "DEFAULT":
            setup.range_, setup.auto = spec.default_range, False
        else:
            self._apply_range(spec, setup, v)
        self._configuring()
        self._setups[spec.function] = setup

    def _range_query(self, call: Call, spec: FunctionSpec) -> str:
        call.count(0, 1)
        if call.has(0):
            word = call.word(0, ("MINimum", "MAXimum"))
            return format_reading(spec.ranges[0] if word == "MINIMUM" else spec.ranges[-1])
        return format_reading(self._setups[spec.function].range_)

    def _auto_set(self, call: Call, spec: FunctionSpec) -> None:
        call.count(1, 1)
        setup = self._setups[spec.function]
        p = call.params[0]
        once = p.kind == "word" and p.text == "ONCE"
        on = False if once else call.boolean(0)
        self._configuring()
        if once:
            setup.range_ = self._autorange(spec, setup.range_)
            setup.auto = False
        else:
            setup.auto = on

    def _nplc_set(self, call: Call, spec: FunctionSpec) -> None:
        call.count(1, 1)
        nplc = call.number(0, low=NPLC_MIN, high=NPLC_MAX, default=NPLC_DEFAULT)
        self._configuring()
        self._setups[spec.function].nplc = nplc

    def _nplc_query(self, call: Call, spec: FunctionSpec) -> str:
        call.count(0, 1)
        if call.has(0):
            word = call.word(0, ("MINimum", "MAXimum"))
            return format_reading(NPLC_MIN if word == "MINIMUM" else NPLC_MAX)
        return format_reading(self._setups[spec.function].nplc)

    def _function_set(self, call: Call) -> None:
        call.count(1, 1)
        text = call.string(0)
        for function, spec in SPECS.items():
            if matches_pattern(spec.header, text):
                self._configuring()
                self._function = function
                return
        raise ScpiError(-224, "expected one of VOLT, RES, FRES, CURR")

    def _function_query(self, call: Call) -> str:
        call.count(0, 0)
        return f'"{SPECS[self._function].name}"'

    def _auto_query(self, call: Call, spec: FunctionSpec) -> str:
        call.count(0, 0)
        return "1" if self._setups[spec.function].auto else "0"

    def _sample_set(self, call: Call) -> None:
        call.count(1, 1)
        self._sample_count = call.integer(0, low=1, high=COUNT_MAX)
        self._readings = None

    def _sample_query(self, call: Call) -> str:
        call.count(0, 0)
        return str(self._sample_count)

    def _trigger_set(self, call: Call) -> None:
        call.count(1, 1)
        self._trigger_count = call.integer(0, low=1, high=COUNT_MAX)
        self._readings = None

    def _trigger_query(self, call: Call) -> str:
        call.count(0, 0)
        return str(self._trigger_count)

    # ----------------------------------------------------------------- handlers: acquisition

    def _read(self, call: Call) -> str:
        """READ? = ABORt + INITiate + FETCh? (SCPI-1999 Vol. 1 §3.2)."""
        call.count(0, 0)
        self._acquire()
        return self._fetch(call)

    def _initiate(self, call: Call) -> None:
        call.count(0, 0)
        self._acquire()

    def _fetch(self, call: Call) -> str:
        call.count(0, 0)
        if self._readings is None:
            raise ScpiError(-230, "no readings acquired")
        return ",".join(format_reading(r) for r in self._readings)

    def _abort(self, call: Call) -> None:
        """Acquisitions finish inside INITiate, so there is never one to stop."""
        call.count(0, 0)

    def _acquire(self) -> None:
        total = self._sample_count * self._trigger_count
        if total > COUNT_MAX:
            raise ScpiError(-221, f"sample x trigger count exceeds {COUNT_MAX}")
        # A meter computes while it integrates: parsing the command and solving the circuit are
        # part of a reading's time (its aperture plus its own 1 ms), not added to it, so the
        # controller is not charged for the simulation.  The first reading runs from the
        # message's arrival, each next one from the end of the one before.
        since = self._arrived if self._arrived is not None else self.clock.mark()
        self._arrived = None  # a second trigger in the same message runs from its own start
        readings = []
        for _ in range(total):
            value, cost = self._one_reading()
            self.clock.wait(cost, since=since)
            since = self.clock.mark()
            readings.append(value)
        self._readings = readings

    def handle(self, line: str) -> str | None:
        self._arrived = self.clock.mark()
        try:
            return super().handle(line)
        finally:
            self._arrived = None

    def _probe(self, spec: FunctionSpec, range_: float) -> float:
        try:
            return float(self.probe.meter_value(spec.function, spec.test_current(range_)))
        except RigError as error:
            log.warning("bench could not give a meter value: %s", error)
            raise ScpiError(-240, str(error)) from error

    def _autorange(self, spec: FunctionSpec, previous: float) -> float:
        """Pick the smallest range whose full scale holds the value, paying for a change."""
        chosen = self._autorange_choice(spec)
        if chosen != previous:
            self.clock.wait(AUTORANGE_COST_S)
        return chosen

    def _autorange_choice(self, spec: FunctionSpec) -> float:
        """The smallest range whose full scale holds the value (re-probed per test current)."""
        chosen = spec.ranges[-1]
        cache: dict[float, float] = {}
        for r in spec.ranges:
            current = spec.test_current(r)
            if current not in cache:
                cache[current] = self._probe(spec, r)
            value = cache[current]
            if math.isfinite(value) and abs(value) <= r:
                chosen = r
                break
        return chosen

    def _one_reading(self) -> tuple[float, float]:
        """One reading and the instrument time it takes (integration, own time, autorange)."""
        spec = SPECS[self._function]
        setup = self._setups[self._function]
        cost = setup.nplc / self.line_hz + READING_OVERHEAD_S
        if setup.auto:
            chosen = self._autorange_choice(spec)
            cost += AUTORANGE_COST_S if chosen != setup.range_ else 0.0
            setup.range_ = chosen
        rng, nplc = setup.range_, setup.nplc
        true = self._probe(spec, rng)
        limit = rng * OVERRANGE_FACTOR
        if math.isnan(true) or abs(true) > limit:
            return math.copysign(OVERLOAD, true if not math.isnan(true) else 1.0), cost
        phase = float(self._rng.uniform(0.0, 2 * math.pi))
        value = (
            true
            + noise_rms(rng, nplc) * float(self._rng.standard_normal())
            + spec.pickup_amplitude(rng) * mains_average(nplc, phase)
        )
        step = resolution(rng, nplc)
        value = round(value / step) * step
        if abs(value) > limit:
            return math.copysign(OVERLOAD, value), cost
        return value, cost
