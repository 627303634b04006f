"""Step kinds that involve the operator or the clock, not the meter."""

from __future__ import annotations

from rig.config.reader import Section
from rig.judge.decision import Limits
from rig.routing import Route
from rig.steps.base import Outcome, StepKind, StepSpec
from rig.steps.context import StepContext


class Prompt(StepKind):
    """An operator prompt or confirmation; nothing is reordered across it."""

    name = "prompt"
    unit = ""
    function = None

    def parse(self, sec: Section, spec: StepSpec) -> None:
        spec.params["text"] = sec.string("text") or ""
        spec.barrier = True

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        # the operator may be about to touch the unit: supply off and every relay open first
        ctx.power(None)
        ctx.connect(Route(()))
        confirmed = ctx.prompt(str(spec.params["text"]))
        return Outcome(1.0 if confirmed else 0.0, "", 0.0, Limits(0.5, None))


class Soak(StepKind):
    """A timed wait (let a part reach temperature, let a supply settle)."""

    name = "soak"
    unit = "s"
    function = None

    def parse(self, sec: Section, spec: StepSpec) -> None:
        spec.params["duration_s"] = sec.quantity("duration", "s", positive=True)
        spec.barrier = True

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        seconds = float(spec.params["duration_s"] or 0.0)
        ctx.wait(seconds)
        return Outcome(seconds, "s", 0.0, None)
