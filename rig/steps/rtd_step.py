"""A platinum RTD sensor (a Pt100 or Pt1000 oil or coolant sender, say) against its curve.

The step predicts the element's resistance R(T) from the Callendar-Van Dusen equation of
IEC 60751 at the temperature given (the bench reference's reading, or a stated one) and judges
the measured resistance against it.  The tolerance is an IEC 60751 class, a deviation in degC
that the step turns into ohms through the curve's slope at T, or a stated one in % or ohm.
"""

from __future__ import annotations

import math

from drivers.base import MeterFunction
from rig.config.reader import Section
from rig.judge.decision import Limits
from rig.judge.reference_probe import ReferenceProbe
from rig.models.rtd import (
    T_MAX_C,
    T_MIN_C,
    TOLERANCE_CLASSES,
    Rtd,
    class_span_note,
)
from rig.routing import Route
from rig.steps.base import EarlierSteps, Outcome, StepKind, StepSpec
from rig.steps.context import StepContext
from rig.steps.limits import apply_tolerance, limit_sensitivity, read_tolerance, tolerance_text
from rig.steps.meter_steps import lead_zero_of, ohms_function, ohms_route, read_two_or_four_wire
from rig.steps.model_steps import (
    IEC_60751,
    NtcWindow,
    recorded,
    temperature_at,
    temperature_bounds,
    temperature_parameters,
    temperature_source,
    unstated_u_warnings,
)


def rtd_window(spec: StepSpec, temperature: tuple[float, float]) -> NtcWindow:
    """An rtd step's prediction R(T) (IEC 60751), its standard uncertainty from the temperature's
    through the slope (GUM 5.1.2), and its limits, at a temperature (value, standard uncertainty
    in degC): the one computation a run judges by and ``rig check`` weighs the meter against.
    A temperature off the curve is refused by the model (the step's error).  A tolerance in %
    moves its limits (1 + t) times as far as the prediction (``limit_sensitivity``)."""
    temp, u_temp = temperature
    rtd = Rtd(r0_ohm=float(spec.params["r0_ohm"]))
    predicted = float(rtd.r_at(temp))
    limits = rtd_limits(spec, temp, predicted)
    sensitivity = limit_sensitivity(spec.params.get("tolerance"))
    return NtcWindow(predicted, float(rtd.dr_dt(temp)) * u_temp, limits, sensitivity)


def rtd_limits(spec: StepSpec, temp_c: float, predicted_ohm: float) -> Limits:
    """The step's limits around ``predicted_ohm`` at ``temp_c``: its class's deviation through
    the curve's slope there (IEC 60751, 5.1.2), or its stated tolerance."""
    cls = spec.params.get("tolerance_class")
    if cls is None:
        return apply_tolerance(predicted_ohm, spec.params["tolerance"])
    rtd = Rtd(r0_ohm=float(spec.params["r0_ohm"]))
    allowed = rtd.class_tolerance_ohm(temp_c, cls)
    return Limits.nominal_tol(predicted_ohm, allowed)


class RtdCheck(StepKind):
    """A platinum RTD's resistance (2-wire with the stored lead zero taken off, or 4-wire)
    against R(T) at the reference temperature."""

    name = "rtd"
    unit = "ohm"
    limits_in_meter_units = False
    routes_in_order = True  # its supply is always off (``spec.supply`` is None)

    def one_reading(self, spec: StepSpec) -> str | None:
        return "rtd"

    def meter_function(self, spec: StepSpec) -> MeterFunction:
        return ohms_function(spec)

    def parse(self, sec: Section, spec: StepSpec) -> None:
        read_two_or_four_wire(sec, spec)
        spec.params["r0_ohm"] = sec.quantity("r0", "ohm", 100.0, positive=True)
        temperature_source(sec, spec)
        stated = spec.params.get("temperature_c")
        if stated is not None and not T_MIN_C <= stated <= T_MAX_C:
            sec.problem(
                "temperature",
                f"expected a temperature where IEC 60751 defines the curve, {T_MIN_C:g} to "
                f"{T_MAX_C:g} degC, found {stated:g} degC",
            )
        classes = tuple(TOLERANCE_CLASSES)
        spec.params["tolerance_class"] = sec.string("tolerance_class", None, choices=classes)
        spec.params["tolerance"] = read_tolerance(sec, self.unit)
        given = [key for key in ("tolerance_class", "tolerance") if sec.has(key)]
        if len(given) == 2:
            sec.problem("tolerance", "give either tolerance_class or tolerance, not both")
        elif not given:
            sec.missing(
                "tolerance_class",
                f"an IEC 60751 class ({', '.join(classes)}), or tolerance in % or ohm",
            )

    def model_parameters(self, spec: StepSpec) -> dict[str, str]:
        """Its curve and R0, its tolerance (an IEC 60751 class, or stated) and temperature."""
        cls = spec.params.get("tolerance_class")
        tolerance = (
            {"tolerance_class": str(cls)}
            if cls is not None
            else {"tolerance": tolerance_text(spec.params["tolerance"], self.unit)}
        )
        return {
            "curve": IEC_60751,
            "r0": recorded(float(spec.params["r0_ohm"]), "ohm"),
            **tolerance,
            **temperature_parameters(spec),
        }

    def routes(self, spec: StepSpec) -> list[Route]:
        return [ohms_route(spec)]

    def check_warnings(
        self, spec: StepSpec, earlier: EarlierSteps, probe: ReferenceProbe | None
    ) -> list[str]:
        """A stated temperature with no uncertainty; a class applied where the file lets the
        step be judged outside the temperatures IEC 60751 gives that class for (its stated
        temperature, or its reference's limits)."""
        found = unstated_u_warnings(spec)
        cls = spec.params.get("tolerance_class")
        if cls is None:
            return found
        temps = tuple(t for t in temperature_bounds(spec, earlier) if t is not None)
        note = class_span_note(str(cls), temps)
        return [*found, note] if note else found

    def largest_reading(self, spec: StepSpec, earlier: EarlierSteps) -> float | None:
        """The upper limit at the hottest temperature the step can be judged at (R rises with
        T); None where the file leaves that temperature unbounded."""
        _, hottest = temperature_bounds(spec, earlier)
        if hottest is None or not T_MIN_C <= hottest <= T_MAX_C:
            return None
        predicted = float(Rtd(r0_ohm=float(spec.params["r0_ohm"])).r_at(hottest))
        tolerance_known = spec.params.get("tolerance_class") or spec.params.get("tolerance")
        if not tolerance_known:
            return None
        high = rtd_limits(spec, hottest, predicted).high
        return None if high is None else high + float(spec.params.get("zero_ohm") or 0.0)

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        ctx.power(None)
        reading = ctx.measure_on(
            ohms_route(spec), ohms_function(spec), role="rtd", range_=spec.range_, nplc=spec.nplc
        )
        zero = lead_zero_of(ctx, spec)
        temperature = temperature_at(ctx, spec)
        window = rtd_window(spec, temperature)
        cls = spec.params.get("tolerance_class")
        notes = [
            f"lead zero {zero:g} ohm subtracted" if zero else "",
            class_span_note(str(cls), (temperature[0],)) if cls is not None else "",
        ]
        return Outcome(
            reading.value - zero,
            self.unit,
            math.hypot(reading.u_std, window.u_limits),
            window.limits,
            [reading],
            predicted=window.predicted,
            extras={"temperature_c": temperature[0]},
            note="; ".join(note for note in notes if note),
        )
