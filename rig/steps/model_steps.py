"""Step kinds that compare a reading with what a sensor's physics predicts.

The bench Pt100 gives the reference temperature; an NTC is then judged against its curve at that
temperature (as a resistance, or as the voltage its controller's pull-up divider would show); a
ratiometric sensor's output is judged as a fraction of its measured supply.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from drivers.base import MeterFunction
from rig.config.model_input import above_absolute_zero, read_ratiometric, read_steinhart_hart
from rig.config.reader import Section
from rig.errors import SettingMismatch
from rig.judge.decision import Limits
from rig.judge.propagate import u_quotient
from rig.judge.reference_probe import ReferenceProbe, reading_u_c
from rig.models import ModelInputError
from rig.models.divider import divider_voltage, dv_dr_sensor
from rig.models.ntc import BetaNtc, NtcModel, SteinhartHart
from rig.models.ratiometric import Ratiometric
from rig.models.rtd import T_MAX_C, T_MIN_C, Rtd, class_span_note, r0_it_fits
from rig.quantity import format_quantity
from rig.routing import Route
from rig.steps.base import EarlierSteps, Outcome, StepKind, StepSpec
from rig.steps.context import StepContext
from rig.steps.limits import (
    RECORD_DIGITS,
    apply_tolerance,
    limit_sensitivity,
    read_limits,
    read_tolerance,
    tolerance_text,
)
from rig.steps.pins import read_pins, read_supply


class ReferenceTemperature(StepKind):
    """Ambient from the bench Pt100 (IEC 60751), measured 4-wire on its own pins.  Its
    uncertainty is the meter's and, where the station states its ``[reference_probe]``, the
    probe's own, combined."""

    name = "reference-temperature"
    unit = "degC"
    gives = "degC"
    function = MeterFunction.RES_4W
    limits_in_meter_units = False
    routes_in_order = True  # its supply is always off (``spec.supply`` is None)

    def parse(self, sec: Section, spec: StepSpec) -> None:
        read_pins(sec, spec, "force_hi", "sense_hi", "force_lo", "sense_lo")
        spec.params["r0_ohm"] = sec.quantity("r0", "ohm", 100.0, positive=True)
        spec.limits = read_limits(sec, self.unit, required=False)
        for side in ("low", "high"):
            value = getattr(spec.limits, side) if spec.limits else None
            if value is not None and not T_MIN_C <= value <= T_MAX_C:
                written = side if sec.has(side) else "nominal" if sec.has("nominal") else "max"
                sec.problem(
                    written,
                    f"the {side} limit, {value:g} degC, is outside what a Pt100 reads: "
                    f"{T_MIN_C:g} to {T_MAX_C:g} degC (IEC 60751)",
                )

    def routes(self, spec: StepSpec) -> list[Route]:
        p = spec.pins
        return [Route.four_wire(p["force_hi"], p["sense_hi"], p["force_lo"], p["sense_lo"])]

    def model_parameters(self, spec: StepSpec) -> dict[str, str]:
        """The probe's curve: R0 on the IEC 60751 curve it turns resistance into degC by."""
        return {"curve": IEC_60751, "r0": recorded(float(spec.params["r0_ohm"]), "ohm")}

    def largest_reading(self, spec: StepSpec, earlier: EarlierSteps) -> float | None:
        """The Pt100's resistance at the high temperature limit (R rises with T)."""
        return _pt100_ohm_at_most(spec)

    def check_warnings(
        self, spec: StepSpec, earlier: EarlierSteps, probe: ReferenceProbe | None
    ) -> list[str]:
        """The station's probe, judged by its class, at limits outside that class's span."""
        return [note] if (note := _probe_class_note(probe, _limit_temps(spec))) else []

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        ctx.power(None)
        r = ctx.measure_on(
            self.routes(spec)[0],
            MeterFunction.RES_4W,
            role="pt-4w",
            range_=spec.range_,
            nplc=spec.nplc,
        )
        rtd = Rtd(r0_ohm=float(spec.params["r0_ohm"]))
        if not math.isfinite(r.value) or r.value <= 0:
            return Outcome(math.nan, self.unit, math.nan, spec.limits, [r], note="no Pt100 reading")
        low, high = rtd.r_span()
        if not low <= r.value <= high:
            mixed_up = r0_it_fits(r.value, rtd.r0_ohm) is not None
            raise (SettingMismatch if mixed_up else ModelInputError)(
                off_the_curve(spec, r.value, rtd)
            )
        temp = float(rtd.t_at(r.value))
        probe = ctx.reference_probe
        u_meter, u_temp = reading_u_c(rtd, r.u_std, probe, temp)
        extras = {"r_ohm": r.value}
        if probe is not None:  # each part kept, so the record shows what U is made of
            extras |= {"u_meter_c": u_meter, "u_probe_c": probe.u_std_c(temp)}
        note = _probe_class_note(probe, (temp,))
        return Outcome(temp, self.unit, u_temp, spec.limits, [r], extras=extras, note=note)


def _limit_temps(spec: StepSpec) -> tuple[float, ...]:
    limits = spec.limits
    if limits is None:
        return ()
    return tuple(t for t in (limits.low, limits.high) if t is not None)


def _probe_class_note(probe: ReferenceProbe | None, temps_c: tuple[float, ...]) -> str:
    """The station's reference probe's class held against the temperatures it is used at."""
    if probe is None or probe.tolerance_class is None:
        return ""
    note = class_span_note(probe.tolerance_class, temps_c)
    return f"the station's reference probe: {note}" if note else ""


IEC_60751 = "IEC 60751 (Callendar-Van Dusen)"
"""The curve a platinum resistance thermometer's R0 scales, as a run's record names it."""


def recorded(value: float, unit: str) -> str:
    """A model parameter as the run's record keeps it: ``2 kohm``, ``3450 K``."""
    return format_quantity(value, unit, RECORD_DIGITS)


def temperature_parameters(spec: StepSpec) -> dict[str, str]:
    """Where a model step's temperature comes from, by its file key: an earlier step's id,
    or the stated temperature (with its standard uncertainty where the file states one)."""
    source = spec.params.get("temperature_from")
    if source:
        return {"temperature_from": str(source)}
    found = {"temperature": recorded(float(spec.params["temperature_c"]), "degC")}
    u = spec.params.get("temperature_u_k")
    if u is not None:
        found["temperature_u"] = recorded(float(u), "K")
    return found


def stated_temperature(spec: StepSpec) -> tuple[float, float] | None:
    """A model step's stated temperature in degC and its standard uncertainty in K (0 where
    the file states none); None where the step reads an earlier step's instead."""
    stated = spec.params.get("temperature_c")
    if spec.params.get("temperature_from") or stated is None:
        return None
    return float(stated), float(spec.params.get("temperature_u_k") or 0.0)


def unstated_u_warnings(spec: StepSpec) -> list[str]:
    """``rig check``'s word on a stated temperature with no ``temperature_u``: the prediction's
    U then leaves out how far the sensor may be from that temperature."""
    stated = spec.params.get("temperature_c")
    if spec.params.get("temperature_from") or stated is None:
        return []
    if spec.params.get("temperature_u_k") is not None:
        return []
    return [
        f"its stated temperature, {format_quantity(float(stated), 'degC')}, has no "
        "temperature_u: the prediction's U leaves out how far the sensor may be from it"
    ]


def ntc_model_parameters(model: NtcModel) -> dict[str, str]:
    """An NTC's curve by the keys a file gives it: R25 and beta, or the three Steinhart-Hart
    coefficients (each as Python writes the number, with every digit it holds)."""
    if isinstance(model, SteinhartHart):
        return {"steinhart_hart": f"[{model.a!r}, {model.b!r}, {model.c!r}]"}
    if isinstance(model, BetaNtc):
        found = {"r25": recorded(model.r25_ohm, "ohm"), "beta": recorded(model.beta_k, "K")}
        if model.t0_c != 25.0:
            found["t0"] = recorded(model.t0_c, "degC")
        return found
    return {"model": repr(model)}


def off_the_curve(spec: StepSpec, r_ohm: float, rtd: Rtd) -> str:
    """Why a reference-temperature reading has no temperature, and what to look at: a reading
    the curve of ten times (or a tenth of) the step's r0 holds is a Pt1000 read as a Pt100, or
    the reverse, so the sequence's r0 is checked before the probe or the meter."""
    low, high = rtd.r_span()
    r0 = rtd.r0_ohm
    said = (
        f"the reading {format_quantity(r_ohm, 'ohm', 6)} is outside what a platinum probe with "
        f"r0 = {r0:g} ohm reads, {format_quantity(low, 'ohm')} to {format_quantity(high, 'ohm')}"
        f" ({T_MIN_C:g} to {T_MAX_C:g} degC, IEC 60751)"
    )
    fits = r0_it_fits(r_ohm, r0)
    key = f"{spec.key}.r0"
    if fits is None:
        return f"{said}: check the probe and its wiring, and the sequence's r0 ({key})"
    return (
        f"{said}, and inside what one with r0 = {fits:g} ohm reads: the probe looks like a "
        f"Pt{fits:g} where the sequence says Pt{r0:g}; check the sequence's r0 ({key}, "
        f"{r0:g} ohm when it is not written)"
    )


def _read_ntc_model(sec: Section) -> NtcModel | None:
    if sec.has("steinhart_hart"):
        return read_steinhart_hart(sec)
    r25 = sec.quantity("r25", "ohm", positive=True)
    beta = sec.quantity("beta", "K", positive=True)
    if r25 is None or beta is None:
        return None
    return BetaNtc(r25, beta)


def _earlier_or_stated(
    sec: Section,
    spec: StepSpec,
    from_key: str,
    value_key: str,
    unit: str,
    *,
    positive: bool = False,
) -> tuple[str, Any]:
    """One of two keys is required: ``from_key``, naming an earlier step whose value is used
    (a dependency of the step), or ``value_key``, a value stated in ``unit``.  Returns the key
    given and its value (a step id, or the value in SI; None where it is wrong or missing)."""
    if sec.has(from_key) and sec.has(value_key):
        sec.problem(value_key, f"give either {from_key} or {value_key}, not both")
    if sec.has(value_key) and not sec.has(from_key):
        return value_key, sec.quantity(value_key, unit, positive=positive)
    sec.raw(value_key)  # a known key, whichever of the two is given
    if not sec.has(from_key):
        sec.missing(from_key, f"the id of an earlier step, or {value_key} with a value in {unit}")
        return from_key, None
    source = sec.string(from_key)
    if source is not None:
        spec.depends_on = (*spec.depends_on, source)
        spec.inputs[from_key] = (source, unit)
    return from_key, source


def temperature_source(sec: Section, spec: StepSpec) -> None:
    """``temperature_from`` (an earlier step's reading) or a stated ``temperature`` in degC,
    with, optionally, its standard uncertainty ``temperature_u`` in K."""
    key, value = _earlier_or_stated(sec, spec, "temperature_from", "temperature", "degC")
    if key == "temperature":
        value = above_absolute_zero(sec, key, value)
    _stated_u(sec, spec, key, "temperature", "K")
    spec.params["temperature_from" if key == "temperature_from" else "temperature_c"] = value


def _pt100_ohm_at_most(spec: StepSpec) -> float | None:
    """A reference-temperature step's largest passing resistance, or None without a high limit."""
    if spec.limits is None or spec.limits.high is None:
        return None
    return float(Rtd(r0_ohm=float(spec.params["r0_ohm"])).r_at(spec.limits.high))


def temperature_bounds(spec: StepSpec, earlier: EarlierSteps) -> tuple[float | None, float | None]:
    """The coldest and hottest temperatures a model step can be judged at: its stated one, or
    the limits of the reference-temperature step it reads (a reference outside them fails that
    step).  None on a side the file leaves open."""
    source = spec.params.get("temperature_from")
    if not source:
        stated = spec.params.get("temperature_c")
        return (None, None) if stated is None else (float(stated), float(stated))
    reference = earlier(str(source))
    if reference is None or reference.kind != "reference-temperature" or reference.limits is None:
        return None, None
    return reference.limits.low, reference.limits.high


def _reference_v_at_most(spec: StepSpec, earlier: EarlierSteps) -> float | None:
    """The divider's highest reference voltage: the stated one, or the high limit of the volts
    step it is measured by."""
    source = spec.params.get("reference_from")
    if not source:
        stated = spec.params.get("reference_v")
        return None if stated is None else float(stated)
    reference = earlier(str(source))
    if reference is None or reference.kind != "volts" or reference.limits is None:
        return None
    return reference.limits.high


def temperature_at(ctx: StepContext, spec: StepSpec) -> tuple[float, float]:
    """The temperature a model step is judged at, and its standard uncertainty."""
    source = spec.params.get("temperature_from")
    if source:
        earlier = ctx.earlier(source)
        return earlier.value, earlier.u_std
    stated = stated_temperature(spec)
    assert stated is not None  # parsing requires one of the two
    return stated


_NTC_MEASURES = {"resistance": "ohm", "voltage": "V"}
"""What an ntc step's ``measure`` takes, and the unit the step then reads in."""
_NTC_BY_MEASURE = ("tolerance", "pullup", "reference", "reference_u", "reference_from", "supply")
"""The keys of an ntc step whose meaning (or whether they belong) depends on ``measure``."""


def _ntc_measure(sec: Section) -> str | None:
    """``measure`` ("resistance" when it is not written); None where it is wrong, a problem."""
    mode = sec.string("measure", "resistance", choices=tuple(_NTC_MEASURES))
    return mode if sec.raw("measure") in (None, mode) else None


def _stated_u(sec: Section, spec: StepSpec, key: str, stated: str, unit: str) -> None:
    """``<stated>_u``, a stated figure's standard uncertainty (kept as ``<stated>_u_<unit>``),
    where ``key`` says the figure is stated; refused with ``<stated>_from``, whose step's own
    uncertainty is used."""
    name = f"{stated}_u"
    if key == stated:
        spec.params[f"{name}_{unit.lower()}"] = sec.quantity(name, unit, None, not_negative=True)
    elif sec.has(name):
        sec.problem(
            name,
            f"goes with a stated {stated}; with {stated}_from the earlier step's uncertainty is "
            "used",
        )


def stated_reference(spec: StepSpec) -> tuple[float, float] | None:
    """An ntc step's stated divider reference in V and its standard uncertainty in V (0 where
    the file states none); None where it reads an earlier step's, or measures resistance."""
    stated = spec.params.get("reference_v")
    if spec.params.get("reference_from") or stated is None:
        return None
    return float(stated), float(spec.params.get("reference_u_v") or 0.0)


def unstated_reference_u_warnings(spec: StepSpec) -> list[str]:
    """``rig check``'s word on a stated divider reference with no ``reference_u``: the
    prediction scales with it, so its U then leaves out how far the controller's reference
    may be from the stated figure."""
    stated = stated_reference(spec)
    if stated is None or spec.params.get("reference_u_v") is not None:
        return []
    return [
        f"its stated reference, {format_quantity(stated[0], 'V')}, has no reference_u: the "
        "prediction's U leaves out how far the divider's reference may be from it"
    ]


class NtcCheck(StepKind):
    """An NTC thermistor against its curve at the reference temperature.

    ``measure = "resistance"``: the sensor's resistance (2-wire) against R(T) ± tolerance.
    ``measure = "voltage"``: the signal behind the controller's pull-up against the divider
    voltage V = Vref R/(R + Rpull) that R(T) gives.
    """

    name = "ntc"
    unit = "ohm"
    limits_in_meter_units = False
    routes_in_order = True  # off in resistance mode, where ``spec.supply`` is None

    def meter_function(self, spec: StepSpec) -> MeterFunction:
        """Ohms (2-wire) or DC volts, as ``measure`` says."""
        voltage = spec.params.get("mode") == "voltage"
        return MeterFunction.DC_VOLTS if voltage else MeterFunction.RES_2W

    def one_reading(self, spec: StepSpec) -> str | None:
        return "signal" if spec.params.get("mode") == "voltage" else "ntc"

    def parse(self, sec: Section, spec: StepSpec) -> None:
        read_pins(sec, spec, "hi", "lo")
        mode = _ntc_measure(sec)
        spec.params["mode"] = mode
        spec.params["model"] = _read_ntc_model(sec)
        temperature_source(sec, spec)
        unit = _NTC_MEASURES.get(mode) if mode else None
        spec.params["unit"] = unit
        if unit is None:  # ``measure`` is wrong (reported): what the keys it rules must hold is not
            for key in _NTC_BY_MEASURE:  # known, so they are left to be judged once it is mended
                sec.raw(key)
            return
        tolerance = read_tolerance(sec, unit)
        if tolerance is None and not sec.has("tolerance"):
            sec.missing("tolerance", f"a tolerance such as '5 %' or '0.1 {unit}'")
        spec.params["tolerance"] = tolerance
        if mode == "voltage":
            spec.params["pullup_ohm"] = sec.quantity("pullup", "ohm", positive=True)
            key, value = _earlier_or_stated(
                sec, spec, "reference_from", "reference", "V", positive=True
            )
            spec.params["reference_from" if key == "reference_from" else "reference_v"] = value
            _stated_u(sec, spec, key, "reference", "V")
            read_supply(sec, spec)

    def model_parameters(self, spec: StepSpec) -> dict[str, str]:
        """Its curve, what it measures, its tolerance and temperature, and measuring voltage
        the divider's pull-up and reference."""
        unit = str(spec.params["unit"])
        found = {
            "measure": str(spec.params["mode"]),
            **ntc_model_parameters(spec.params["model"]),
            "tolerance": tolerance_text(spec.params["tolerance"], unit),
            **temperature_parameters(spec),
        }
        if spec.params["mode"] == "voltage":
            found["pullup"] = recorded(float(spec.params["pullup_ohm"]), "ohm")
            source = spec.params.get("reference_from")
            if source:
                found["reference_from"] = str(source)
            else:
                found["reference"] = recorded(float(spec.params["reference_v"]), "V")
                u_ref = spec.params.get("reference_u_v")
                if u_ref is not None:
                    found["reference_u"] = recorded(float(u_ref), "V")
        return found

    def check_warnings(
        self, spec: StepSpec, earlier: EarlierSteps, probe: ReferenceProbe | None
    ) -> list[str]:
        """A stated temperature, or a stated divider reference, with no stated uncertainty."""
        return unstated_u_warnings(spec) + unstated_reference_u_warnings(spec)

    def routes(self, spec: StepSpec) -> list[Route]:
        route = Route.dmm(spec.pins["hi"], spec.pins["lo"])
        if spec.supply is not None:
            route = route + Route.supply(spec.supply.pos, spec.supply.neg)
        return [route]

    def largest_reading(self, spec: StepSpec, earlier: EarlierSteps) -> float | None:
        """The upper limit at the coldest temperature the step can be judged at: an NTC's
        resistance, and its divider's voltage, fall as it warms.  None where the file leaves
        the temperature or the divider's reference unbounded."""
        model: NtcModel | None = spec.params.get("model")
        tolerance = spec.params.get("tolerance")
        coldest, _ = temperature_bounds(spec, earlier)
        if model is None or tolerance is None or coldest is None:
            return None
        r_most = float(model.r_at(coldest))
        if spec.params["mode"] == "resistance":
            return apply_tolerance(r_most, tolerance).high
        v_ref = _reference_v_at_most(spec, earlier)
        if v_ref is None:
            return None
        v_most = float(divider_voltage(v_ref, float(spec.params["pullup_ohm"]), r_most))
        return apply_tolerance(v_most, tolerance).high

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        # the reading first, the prediction after: the engine may move the relays on for the
        # next step while this one computes
        voltage = spec.params["mode"] == "voltage"
        ctx.power(spec.supply if voltage else None)
        reading = ctx.measure_on(
            self.routes(spec)[0],
            self.meter_function(spec),
            role=str(self.one_reading(spec)),
            range_=spec.range_,
            nplc=spec.nplc,
        )
        temp, u_temp = temperature_at(ctx, spec)
        if not voltage:  # read 2-wire: the fixture's leads are off, as resistance and rtd take them
            zero = ctx.lead_zero(spec.pins["hi"], spec.pins["lo"])
            window = ntc_window(spec, (temp, u_temp))
            return Outcome(
                reading.value - zero,
                "ohm",
                math.hypot(reading.u_std, window.u_limits),
                window.limits,
                [reading],
                predicted=window.predicted,
                extras={"temperature_c": temp},
                note=f"lead zero {zero:g} ohm subtracted" if zero else "",
            )
        if spec.params.get("reference_from"):
            ref = ctx.earlier(spec.params["reference_from"])
            v_ref, u_ref = ref.value, ref.u_std
        else:
            stated = stated_reference(spec)
            assert stated is not None  # parsing requires reference or reference_from
            v_ref, u_ref = stated
        window = ntc_window(spec, (temp, u_temp), (v_ref, u_ref))
        return Outcome(
            reading.value,
            "V",
            math.hypot(reading.u_std, window.u_limits),
            window.limits,
            [reading],
            predicted=window.predicted,
            extras={
                "temperature_c": temp,
                "reference_v": v_ref,
                "predicted_r_ohm": float(spec.params["model"].r_at(temp)),
            },
        )


@dataclass(frozen=True)
class NtcWindow:
    """What an ntc (or rtd) step judges a reading against at one reference temperature."""

    predicted: float
    """R(T), or the divider voltage it gives, in the step's unit."""
    u_std: float
    """The prediction's standard uncertainty, from the temperature's and the reference's."""
    limits: Limits
    """The prediction ± the step's tolerance."""
    sensitivity: float = 1.0
    """How far the limits move per unit the prediction moves, on the side that moves most
    (``limit_sensitivity``): 1 + t for a tolerance of t in %."""

    @property
    def u_limits(self) -> float:
        """What the prediction's uncertainty gives the step's U: the limits are judged against,
        and they carry the prediction's error times their sensitivity to it (GUM 5.1.2)."""
        return self.sensitivity * self.u_std


def ntc_window(
    spec: StepSpec,
    temperature: tuple[float, float],
    reference: tuple[float, float] | None = None,
) -> NtcWindow:
    """An ntc step's prediction, its uncertainty and its limits at a temperature (value, standard
    uncertainty in degC) and, measuring voltage, the divider's reference (value, standard
    uncertainty in V): the one computation a run judges by and ``rig check`` and ``rig limits``
    weigh the meter against (GUM 5.1.2: uncorrelated inputs, sensitivities from the model; the
    limits' own sensitivity to the prediction is ``NtcWindow.sensitivity``)."""
    model: NtcModel = spec.params["model"]
    tolerance = spec.params["tolerance"]
    sensitivity = limit_sensitivity(tolerance)
    temp, u_temp = temperature
    r_pred = float(model.r_at(temp))
    u_r_pred = abs(float(model.dr_dt(temp))) * u_temp
    if reference is None:
        return NtcWindow(r_pred, u_r_pred, apply_tolerance(r_pred, tolerance), sensitivity)
    v_ref, u_ref = reference
    pull = float(spec.params["pullup_ohm"])
    v_pred = float(divider_voltage(v_ref, pull, r_pred))
    u_v_pred = math.hypot(
        float(dv_dr_sensor(v_ref, pull, r_pred)) * u_r_pred, v_pred / v_ref * u_ref
    )
    return NtcWindow(v_pred, u_v_pred, apply_tolerance(v_pred, tolerance), sensitivity)


class RatiometricCheck(StepKind):
    """A ratiometric sensor's output as a fraction of its supply, against its transfer at the
    known pressure (ambient unless stated)."""

    name = "ratiometric"
    unit = "%"
    limits_in_meter_units = False
    routes_in_order = True

    def parse(self, sec: Section, spec: StepSpec) -> None:
        read_pins(sec, spec, "output", "power", "ground")
        spec.params["model"] = read_ratiometric(sec)
        spec.params["pressure_pa"] = sec.quantity("pressure", "Pa", STANDARD_PRESSURE_PA)
        spec.params["pressure_u_pa"] = sec.quantity("pressure_u", "Pa", None, not_negative=True)
        tolerance = sec.quantity("tolerance", "%", positive=True)
        spec.params["tolerance_pct"] = tolerance
        read_supply(sec, spec)

    def routes(self, spec: StepSpec) -> list[Route]:
        p = spec.pins
        extra = Route(()) if spec.supply is None else Route.supply(spec.supply.pos, spec.supply.neg)
        return [
            Route.dmm(p["output"], p["ground"]) + extra,
            Route.dmm(p["power"], p["ground"]) + extra,
        ]

    def model_parameters(self, spec: StepSpec) -> dict[str, str]:
        """Its transfer (fraction of supply at each end of its range), the pressure it is
        judged at, and its tolerance in percentage points of supply."""
        model: Ratiometric = spec.params["model"]
        return {
            "range_low": recorded(model.p_min, "Pa"),
            "range_high": recorded(model.p_max, "Pa"),
            "fraction_low": f"{model.frac_min:.{RECORD_DIGITS}g}",
            "fraction_high": f"{model.frac_max:.{RECORD_DIGITS}g}",
            "pressure": recorded(float(spec.params["pressure_pa"]), "Pa"),
            **(
                {}
                if spec.params.get("pressure_u_pa") is None
                else {"pressure_u": recorded(float(spec.params["pressure_u_pa"]), "Pa")}
            ),
            "tolerance": recorded(float(spec.params["tolerance_pct"]), "%"),
        }

    def parameter_text(self, key: str, recorded: str) -> str:
        """The tolerance, recorded as ``2 %``, is in percentage points of the supply, not a
        percentage of the prediction: ``2 percentage points of supply``."""
        if key != "tolerance" or not recorded.endswith("%"):
            return recorded
        return f"{recorded.removesuffix('%').strip()} percentage points of supply"

    def check_warnings(
        self, spec: StepSpec, earlier: EarlierSteps, probe: ReferenceProbe | None
    ) -> list[str]:
        """A pressure (stated, or the standard atmosphere by default) with no uncertainty."""
        if spec.params.get("pressure_u_pa") is not None:
            return []
        pressure = format_quantity(float(spec.params["pressure_pa"]), "Pa")
        return [
            f"the pressure it is judged at, {pressure}, has no pressure_u: the prediction's U "
            "leaves out how far the sensor's pressure may be from it"
        ]

    def autoranged_readings(self, spec: StepSpec, held: float | None) -> int:
        """The supply reading autoranges (nothing in the file bounds the sensor's supply), also
        where a range is held for the output; with none held both do, onto what is as a rule
        one range: one autorange either way."""
        return 1

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        ctx.power(spec.supply)
        out_route, supply_route = self.routes(spec)
        fn = MeterFunction.DC_VOLTS
        v_out = ctx.measure_on(out_route, fn, role="output", range_=spec.range_, nplc=spec.nplc)
        v_sup = ctx.measure_on(supply_route, fn, role="supply", range_=None, nplc=spec.nplc)
        predicted, u_predicted = ratiometric_prediction(spec)
        tol = float(spec.params["tolerance_pct"])
        limits = Limits(predicted - tol, predicted + tol)
        if not (math.isfinite(v_out.value) and math.isfinite(v_sup.value)) or v_sup.value == 0:
            return Outcome(math.nan, "%", math.nan, limits, [v_out, v_sup], predicted=predicted)
        fraction = v_out.value / v_sup.value * 100.0
        u_read = u_quotient(v_out.value, v_sup.value, v_out.u_std, v_sup.u_std) * 100.0
        u = math.hypot(u_read, u_predicted)
        return Outcome(
            fraction,
            "%",
            u,
            limits,
            [v_out, v_sup],
            predicted=predicted,
            extras={"output_v": v_out.value, "supply_v": v_sup.value},
        )


STANDARD_PRESSURE_PA = 101_325.0
"""The standard atmosphere: the pressure a ratiometric step is judged at unless it states one."""


def ratiometric_prediction(spec: StepSpec) -> tuple[float, float]:
    """A ratiometric step's predicted output in % of supply at its pressure, and the standard
    uncertainty the pressure's own gives it through the transfer's slope (GUM 5.1.2:
    u = |df/dp| u(p); 0 where the file states no ``pressure_u``)."""
    model: Ratiometric = spec.params["model"]
    pressure = float(spec.params["pressure_pa"])
    u_pressure = float(spec.params.get("pressure_u_pa") or 0.0)
    predicted = float(model.fraction_at(pressure)) * 100.0
    slope = (model.frac_max - model.frac_min) / (model.p_max - model.p_min) * 100.0
    return predicted, abs(slope) * u_pressure
