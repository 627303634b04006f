"""Step kinds that involve the operator or the clock, not the meter."""

from __future__ import annotations

from rig.config.reader import Section
from rig.judge.decision import Limits
from rig.routing import Route
from rig.steps.base import Outcome, StepKind, StepSpec
from rig.steps.context import StepContext

DECLINED = ("fail", "stop")
"""What a prompt answered no does (its ``declined`` key): fail its step and go on (the default),
or fail its step and stop the run, for a question whose no leaves nothing worth measuring (the
unit is not connected) or nothing safe to do (a safety confirmation)."""


class Prompt(StepKind):
    """An operator prompt or confirmation; nothing is reordered across it."""

    name = "prompt"
    unit = ""
    function = None
    judged = False

    def parse(self, sec: Section, spec: StepSpec) -> None:
        spec.params["text"] = sec.string("text") or ""
        spec.params["declined"] = sec.string("declined", "fail", choices=DECLINED)
        spec.barrier = True

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        # the operator may be about to touch the unit: supply off and every relay open first
        ctx.power(None)
        ctx.connect(Route(()))
        text = str(spec.params["text"])
        stops = spec.params.get("declined") == "stop"
        confirmed = ctx.prompt(text, stops_run=stops)
        outcome = Outcome(1.0 if confirmed else 0.0, "", 0.0, Limits(0.5, None))
        if stops and not confirmed:
            outcome.note = 'declined: the run stops here (declined = "stop")'
            outcome.ends_run = f"the operator declined {text!r}; the sequence stops the run on a no"
        return outcome


class Soak(StepKind):
    """A timed wait (let a part reach temperature, let a supply settle)."""

    name = "soak"
    unit = "s"
    function = None
    judged = False

    def parse(self, sec: Section, spec: StepSpec) -> None:
        spec.params["duration_s"] = sec.quantity("duration", "s", positive=True)
        spec.barrier = True

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        seconds = float(spec.params["duration_s"] or 0.0)
        ctx.wait(seconds)
        return Outcome(seconds, "s", 0.0, None)
