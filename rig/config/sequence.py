"""Sequence files: the steps of a test, as data (TOML).  Nothing in a sequence is ever executed.

A sequence has a header (name, decision rule, whether steps may be reordered) and an array of
``[[steps]]``, each with an ``id``, a ``kind`` (see ``rig.steps.KINDS`` and docs/sequence-file.md)
and that kind's keys.  A step may use an earlier step's result by naming its id
(``temperature_from = "ambient"``), never through an expression.
"""

from __future__ import annotations

import hashlib
import re
from dataclasses import dataclass, field
from pathlib import Path

from rig.config.model_input import refused
from rig.config.reader import Section, TomlDoc
from rig.errors import Problem
from rig.judge.decision import DecisionRule
from rig.models import ModelInputError
from rig.steps import KINDS, StepKind, StepSpec

_ID = re.compile(r"^[a-z][a-z0-9_-]{0,47}$")
RULES = {"simple": DecisionRule.SIMPLE, "guarded": DecisionRule.GUARDED}


@dataclass
class Sequence:
    name: str
    path: Path
    content_hash: str
    description: str = ""
    rule: DecisionRule = DecisionRule.SIMPLE
    reorder: bool = True
    settle_s: float | None = None
    """The settle time of every meter step that states none (None: prove settling)."""
    steps: list[StepSpec] = field(default_factory=list)
    source: TomlDoc | None = field(default=None, repr=False, compare=False)
    """The file as read: where its keys are, for problems found after loading."""

    def step(self, step_id: str) -> StepSpec:
        return next(s for s in self.steps if s.id == step_id)

    def recorded_path(self) -> str:
        """Where a run records this sequence as coming from: the file's full path, so that
        ``rig diagnose`` and ``rig report`` find it again from any folder (messages keep the path
        as typed).  A sequence built in memory (``rig harness``) names its place in words."""
        return str(self.path.resolve()) if self.path.is_file() else str(self.path)

    def problem(self, key: str, message: str) -> Problem:
        """A problem of this file found after loading (by the planner), at the line of ``key``."""
        line = self.source.line_of(key) if self.source is not None else None
        return Problem(str(self.path), key, message, line=line)


def load_sequence(path: Path | str) -> Sequence:
    """Read and validate a sequence; raises ``ConfigError`` listing every problem."""
    doc = TomlDoc(Path(path), kind="a sequence file (.toml)")
    sequence = parse_sequence(doc)
    doc.raise_if_problems()
    return sequence


def parse_sequence(doc: TomlDoc) -> Sequence:
    root = doc.root
    head = root.table("sequence", required=True)
    sequence = Sequence(
        name="",
        path=doc.path,
        content_hash=hashlib.sha256(doc.text.encode("utf-8")).hexdigest(),
        source=doc,
    )
    if head:
        sequence.name = head.string("name") or ""
        sequence.description = head.string("description", "")
        rule = head.string("decision_rule", "simple", choices=tuple(RULES))
        sequence.rule = RULES.get(rule or "simple", DecisionRule.SIMPLE)
        sequence.reorder = head.boolean("reorder", True)
        sequence.settle_s = _settle(head, None)
        head.reject_unknown()
    seen: dict[str, StepSpec] = {}
    for sec in root.table_list("steps"):
        spec = _parse_step(sec, sequence.rule, seen, sequence.settle_s)
        if spec is not None:
            sequence.steps.append(spec)
            seen[spec.id] = spec
    if not sequence.steps and not doc.problems:
        root.problem("steps", "no steps; expected one or more [[steps]] tables")
    root.reject_unknown()
    return sequence


def _settle(sec: Section, default: float | None) -> float | None:
    """A stated settle time ("2 ms", zero allowed), or ``default`` when the key is absent."""
    value = sec.quantity("settle", "s", default)
    if value is not None and value < 0:
        sec.problem("settle", f"expected a settle time of 0 s or more, found {sec.raw('settle')!r}")
        return default
    return value


def _parse_step(
    sec: Section,
    default_rule: DecisionRule,
    seen: dict[str, StepSpec],
    default_settle: float | None,
) -> StepSpec | None:
    step_id = sec.string("id")
    kind_name = sec.string("kind", choices=tuple(KINDS))
    if step_id is not None and not _ID.match(step_id):
        sec.problem("id", f"expected lower-case letters, digits, '-' or '_', found {step_id!r}")
    if step_id in seen:
        sec.problem("id", f"step id {step_id!r} is used twice")
    if kind_name is None or kind_name not in KINDS:
        return None
    step_id = step_id or ""  # a step without an id is still read, for its other problems
    kind = KINDS[kind_name]
    rule_name = sec.string("decision_rule", None, choices=tuple(RULES)) if kind.judged else None
    spec = StepSpec(
        id=step_id,
        kind=kind_name,
        title=sec.string("title", step_id),
        key=sec.prefix,
        rule=RULES[rule_name] if rule_name else default_rule,
    )
    if kind.function is not None:  # a kind that reads the meter, whatever its parameters
        spec.nplc = sec.number("nplc", 1.0, minimum=0.001)
    try:
        kind.parse(sec, spec)
    except ModelInputError as exc:  # a model refused what no check of the kind's caught
        sec.problem("", refused(exc))
        return None
    if kind.meter_function(spec) is not None:  # a supply step's own settle is read by its kind
        spec.settle_s = _settle(sec, default_settle)
        meter_unit = _meter_unit(kind.unit, spec)
        if sec.raw("range") not in (None, "auto") and meter_unit is not None:
            spec.range_ = sec.quantity("range", meter_unit)
    _refuse_unread(sec, kind, spec)
    for key, (ref, unit) in spec.inputs.items():
        wrong = input_problem(seen.get(ref), ref, unit)
        if wrong:
            sec.problem(key, wrong)
    sec.reject_unknown()
    return spec if step_id else None


_DOES = {"prompt": "asks the operator", "soak": "waits"}
"""What a step that reads no meter does instead, by kind (else: the supply's readback)."""


def _refuse_unread(sec: Section, kind: StepKind, spec: StepSpec) -> None:
    """The meter's keys on a step that reads no meter, and a decision rule on one that judges
    no reading against an uncertainty, each named with why: a key that does nothing must not
    look as if it did (``range = "10 V"`` on a prompt)."""
    what = _DOES.get(kind.name, "reads the supply's own readback")
    unread = []
    if kind.meter_function(spec) is None:
        unread = [(key, "no meter is read") for key in ("range", "nplc")]
    if not kind.judged:  # a supply-current step reads its own settle (before its readback)
        unread += [("settle", "no meter is read"), ("decision_rule", "nothing is measured")]
    for key, why in unread:
        if sec.has(key):
            sec.refuse(key, f"a {kind.name} step takes no {key}: it {what}; {why}")


def _meter_unit(kind_unit: str, spec: StepSpec) -> str | None:
    """The unit of the meter's range for a step (a temperature step reads ohms); None where the
    step's own unit is not known (a wrong key it depends on is reported already)."""
    if "unit" in spec.params:
        return None if spec.params["unit"] is None else str(spec.params["unit"])
    return {"degC": "ohm", "%": "V"}.get(kind_unit, kind_unit)


_GIVEN = {"degC": "a temperature in degC", "V": "a voltage in V"}
"""What a step that another takes its input from must give, in words, by unit."""


def input_problem(source: StepSpec | None, ref: str, unit: str) -> str:
    """Why step ``ref`` cannot give a value in ``unit`` to a later step, or "": it must be an
    earlier step whose kind gives that unit.  A volts step taken as a temperature would judge
    the sensor at 5 degC for a 5 V reading, a wire drop taken as the divider's reference at a
    few microvolts: a false verdict either way, refused before anything moves."""
    if source is None:
        return f"names step {ref!r}, which is not an earlier step of this sequence"
    kind = KINDS[source.kind]
    if kind.gives == unit:
        return ""
    givers = ", ".join(k.name for k in KINDS.values() if k.gives == unit) or "none"
    if kind.gives is not None:
        found = f"which gives {_GIVEN.get(kind.gives, 'a value in ' + kind.gives)}"
    elif kind.small_is_good:
        found = "which gives a voltage drop, not a level another step can take"
    else:
        own = source.params.get("unit") or kind.unit or "none"
        found = f"whose value (unit: {own}) no other step can take"
    return (
        f"expected the id of a step that gives {_GIVEN.get(unit, 'a value in ' + unit)} "
        f"(kind {givers}), found {ref!r}, a step of kind {source.kind}, {found}"
    )
