"""Good units drawn at random: every part somewhere inside the tolerance its unit file states.

How each tolerance is drawn, and why, travels with the draws (``Draw``) so that every report can
say it.  Pure computation.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from rig.config.unit_file import NtcSensor, RatiometricSensor, RtdSensor, UnitModel
from rig.models.copper import wire_resistance_ohm
from rig.models.ratiometric import Ratiometric
from rig.models.rtd import TOLERANCE_CLASSES, Rtd
from rig.unit_circuit import ntc_model

FloatArray = npt.NDArray[np.float64]

UNIFORM = "uniform"
UNIFORM_PART = (
    "uniform within the stated ± tolerance: a tolerance is a bound and says nothing more about "
    "where inside it a part lies (rectangular distribution, GUM 4.3.7; common practice)"
)
UNIFORM_AMBIENT = "uniform over the stated range: a unit may be tested anywhere in it"
UNIFORM_METER = (
    "uniform within ± the data sheet's (% of reading + % of range), per reading: the same "
    "rectangular model rig's judge uses for the meter (GUM 4.3.7)"
)


@dataclass(frozen=True)
class Draw:
    """How one tolerance is drawn, and why that way, for the report."""

    what: str
    spread: str
    distribution: str
    why: str


@dataclass
class Samples:
    """One block of drawn units: element values (ohm or volt) and the ambient, per sample."""

    n: int
    values: dict[str, FloatArray]
    ambient_c: FloatArray


class GoodUnitSampler:
    """Draws units that are good by definition: every part somewhere inside its tolerance."""

    def __init__(self, unit: UnitModel) -> None:
        self.unit = unit
        self.draws: list[Draw] = []
        if unit.ambient_range_c is not None:
            low, high = unit.ambient_range_c
            self.draws.append(
                Draw("ambient", f"{low:g} to {high:g} degC", UNIFORM, UNIFORM_AMBIENT)
            )
        self._list_part_draws()

    def _list_part_draws(self) -> None:
        u = self.unit
        parts: list[tuple[str, float]] = []
        for w in u.wires.values():
            parts += [(f"wires.{w.name}.length", w.length_tolerance_pct)]
            parts += [(f"wires.{w.name}.area", w.area_tolerance_pct)]
        parts += [(f"resistors.{r.name}", r.tolerance_pct) for r in u.resistors.values()]
        for s in u.controller.sources if u.controller else []:
            parts += [(f"controller.sources.{s.name}", s.tolerance_pct)]
        for sensor in u.sensors.values():
            if isinstance(sensor, NtcSensor):
                parts += [(f"sensors.{sensor.name}.r25", sensor.r25_tolerance_pct)]
                parts += [(f"sensors.{sensor.name}.beta", sensor.beta_tolerance_pct)]
        for what, pct in parts:
            if pct:
                self.draws.append(Draw(what, f"±{pct:g} %", UNIFORM, UNIFORM_PART))
        for sensor in u.sensors.values():
            if isinstance(sensor, RatiometricSensor) and sensor.fraction_tolerance_pct:
                spread = f"±{sensor.fraction_tolerance_pct:g} percentage points of supply"
                self.draws.append(
                    Draw(f"sensors.{sensor.name}.fraction", spread, UNIFORM, UNIFORM_PART)
                )
        classes = [
            (f"sensors.{s.name}", s.tolerance_class)
            for s in u.sensors.values()
            if isinstance(s, RtdSensor)
        ]
        if u.probe is not None:
            classes.append(("reference_probe", u.probe.tolerance_class))
        for what, cls in classes:
            if cls:
                a, b = TOLERANCE_CLASSES[cls]
                spread = f"class {cls}: ±({a:g} + {b:g}|t|) degC (IEC 60751)"
                self.draws.append(Draw(what, spread, UNIFORM, UNIFORM_PART))

    def sample(
        self, rng: np.random.Generator, n: int, moved: Mapping[str, FloatArray] | None = None
    ) -> Samples:
        """``n`` good units; ``moved`` shifts named sensors from the temperature (K: ntc, rtd)
        or pressure (Pa: ratiometric) the unit file gives them, per unit (a stated input's
        draw, ``rig.analysis.stated_inputs``)."""
        u = self.unit
        moved = moved or {}
        if u.ambient_range_c is None:
            ambient = np.full(n, u.ambient_c)
        else:
            ambient = rng.uniform(*u.ambient_range_c, size=n)
        values: dict[str, FloatArray] = {}

        def spread(pct: float) -> FloatArray:
            return 1.0 + rng.uniform(-pct, pct, size=n) / 100.0 if pct else np.ones(n)

        for w in u.wires.values():
            length = w.length_m * spread(w.length_tolerance_pct)
            area = w.area_mm2 * spread(w.area_tolerance_pct)
            values[f"wire:{w.name}"] = np.asarray(
                wire_resistance_ohm(length, area, ambient), dtype=np.float64
            )
        for r in u.resistors.values():
            if r.tolerance_pct:
                values[f"res:{r.name}"] = r.r_ohm * spread(r.tolerance_pct)
        for s in u.controller.sources if u.controller else []:
            if s.tolerance_pct:
                values[f"src:{s.name}"] = s.volts * spread(s.tolerance_pct)
        for sensor in u.sensors.values():
            shift = moved.get(sensor.name)
            if isinstance(sensor, NtcSensor):
                values[f"ntc:{sensor.name}"] = _ntc_r(sensor, ambient, spread, shift)
            elif isinstance(sensor, RatiometricSensor) and (
                sensor.fraction_tolerance_pct or shift is not None
            ):
                t = sensor.fraction_tolerance_pct
                nominal = _fraction(sensor, u.pressure_pa, shift)
                gain = nominal + rng.uniform(-t, t, size=n) / 100.0 if t else nominal
                values[f"rat:{sensor.name}:gain"] = np.broadcast_to(gain, (n,)).astype(np.float64)
        for sensor in u.sensors.values():
            if isinstance(sensor, RtdSensor):
                temp = ambient if sensor.temp_c is None else np.full(n, sensor.temp_c)
                if sensor.name in moved:
                    temp = temp + moved[sensor.name]
                values[f"rtd:{sensor.name}"] = _rtd_element(
                    rng, sensor.r0_ohm, sensor.tolerance_class, temp
                )
        if u.probe is not None:
            values["probe:element"] = _rtd_element(
                rng, u.probe.r0_ohm, u.probe.tolerance_class, ambient
            )
        return Samples(n, values, ambient)


def _rtd_element(
    rng: np.random.Generator, r0_ohm: float, cls: str | None, temp: FloatArray
) -> FloatArray:
    """R of drawn platinum elements at ``temp``: the class tolerance is a deviation from the
    curve at the element's temperature (IEC 60751), drawn uniform over it; none without a
    class."""
    deviation = np.zeros(len(temp))
    if cls:
        a, b = TOLERANCE_CLASSES[cls]
        deviation = (a + b * np.abs(temp)) * rng.uniform(-1.0, 1.0, size=len(temp))
    return Rtd(r0_ohm=r0_ohm).r_of_element(temp, deviation)


def _fraction(
    sensor: RatiometricSensor, ambient_pa: float, shift_pa: FloatArray | None = None
) -> FloatArray:
    """The output fraction its transfer gives at the pressure it sees, as the circuit has it
    (moved by ``shift_pa`` per unit where a stated pressure's draw moves it)."""
    model = Ratiometric(
        sensor.p_low_pa, sensor.p_high_pa, sensor.fraction_low, sensor.fraction_high
    )
    pressure = ambient_pa if sensor.pressure_pa is None else sensor.pressure_pa
    at = np.asarray(pressure if shift_pa is None else pressure + shift_pa, dtype=np.float64)
    return np.asarray(model.fraction_at(at), dtype=np.float64)


def _ntc_r(
    sensor: NtcSensor,
    ambient: FloatArray,
    spread: Callable[[float], FloatArray],
    shift_k: FloatArray | None = None,
) -> FloatArray:
    """R(T) of a drawn thermistor: R25' (R_nominal(T) / R25)^(B'/B) is the beta model with the
    drawn R25' and B' (exact for the beta model; Steinhart-Hart curves carry no tolerance), at
    its temperature moved by ``shift_k`` per unit where a stated temperature's draw moves it."""
    temp = ambient if sensor.temp_c is None else np.full(len(ambient), sensor.temp_c)
    if shift_k is not None:
        temp = temp + shift_k
    nominal = np.asarray(ntc_model(sensor).r_at(temp), dtype=np.float64)
    if sensor.sh_coefficients is not None or sensor.r25_ohm is None or sensor.beta_k is None:
        return nominal
    r25 = sensor.r25_ohm * spread(sensor.r25_tolerance_pct)
    exponent = spread(sensor.beta_tolerance_pct)
    return np.asarray(r25 * (nominal / sensor.r25_ohm) ** exponent, dtype=np.float64)
