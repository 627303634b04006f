"""The ``harness-proof`` step: a whole harness from its wire list, in one step.

Continuity of every net against its copper limit at the measured ambient, isolation by group
testing (or pair by pair), and the findings named in wire-list words.  The step's value is the
number of findings (limit 0); every reading is stored by the engine as it is taken, and the
per-net resistances, limits and expanded uncertainties and the isolation proved per pair are
kept in the step's extras.
"""

from __future__ import annotations

import math
from pathlib import Path

from drivers.base import MeterFunction
from rig.config.fixture import FixtureMap
from rig.config.reader import Section, named_unreadable
from rig.config.text_file import FileUnreadable
from rig.errors import ConfigError, Problem
from rig.harness.capture import capture_harness, capture_pins, connector_problems
from rig.harness.conductors import Allowances
from rig.harness.isolation import cut_count, cut_sides
from rig.harness.scan import METHODS, HarnessReport, HarnessSettings, scan_harness
from rig.harness.wire_list import WireList, join_problems, load_wire_list, write_wire_list
from rig.judge.decision import Limits
from rig.quantity import format_quantity
from rig.reading_guard import OVERRANGE_FACTOR
from rig.routing import Route
from rig.steps.base import Outcome, StepKind, StepSpec
from rig.steps.context import StepContext
from rig.steps.model_steps import temperature_at, temperature_source


def read_harness_keys(sec: Section, spec: StepSpec, base: Path) -> None:
    """The keys a harness check shares between the step and the ``rig harness`` command."""
    capture = sec.string("capture_to", "")
    if capture:
        spec.params["capture_to"] = (base / capture).resolve()
        if spec.params["capture_to"].is_dir():
            where = f"{capture!r} ({spec.params['capture_to']})"
            sec.problem("capture_to", f"{where}: is a folder; expected a wire list (.csv) to write")
        spec.params["capture_connectors"] = sec.string_list("capture_connectors", None)
    if capture:  # a list to compare the capture with is optional
        text = sec.string("wire_list", "")
    else:  # required, and a blank name is no list at all
        named = sec.named_file("wire_list", "the harness's wire list (.csv)")
        text = named[0] if named else ""
    if text:
        try:
            spec.params["wires"] = load_wire_list((base / text).resolve())
        except FileUnreadable as exc:  # the key that names it is what to fix
            sec.problem("wire_list", named_unreadable(text, exc))
        except ConfigError as exc:  # the list's own lines; once, however many steps read it
            sec.doc.problems.extend(p for p in exc.problems if p not in sec.doc.problems)
    spec.params["allowances"] = Allowances(
        # a negative allowance would tighten a limit below what the wire itself may read
        contact_ohm=sec.quantity("contact_allowance", "ohm", 0.005, not_negative=True),
        splice_ohm=sec.quantity("splice_allowance", "ohm", 0.002, not_negative=True),
        captured_pct=sec.quantity("captured_tolerance", "%", 10.0, not_negative=True),
        two_wire_ohm=sec.quantity("two_wire_allowance", "ohm", 0.2, not_negative=True),
    )
    spec.params["isolation_ohm"] = sec.quantity("isolation", "ohm", 1e6, positive=True)
    spec.params["method"] = sec.string("isolation_method", "groups", choices=METHODS)
    spec.params["continuity_range"] = sec.quantity("continuity_range", "ohm", 100.0, positive=True)
    spec.params["isolation_range"] = sec.quantity("isolation_range", "ohm", 1e7, positive=True)
    beyond = isolation_beyond_range(spec.params["isolation_ohm"], spec.params["isolation_range"])
    if beyond:  # a pass would claim more than any overload on that range proves
        sec.problem("isolation", beyond)
    limits: dict[str, float] = {}
    table = sec.table("net_limits")
    if table is not None:
        for net in list(table.data):
            value = table.quantity(net, "ohm", None, positive=True)
            if value is not None:
                limits[net] = value
        wires = spec.params.get("wires")
        if isinstance(wires, WireList):
            known = {n.name for n in wires.nets}
            for net in limits:
                if net not in known:
                    table.problem(net, f"no net {net!r} in the wire list; nets: {_few(known)}")
    spec.params["net_limits"] = limits


def isolation_beyond_range(required_ohm: float, range_ohm: float) -> str:
    """Why ``required_ohm`` cannot be proved on the isolation range ``range_ohm``, or "".

    An overload says only that a reading is beyond the meter's overrange (``OVERRANGE_FACTOR`` of
    the range, a figure from memory, not a figure of the meter on the bench), and the scan credits
    it with the range's full scale (``ceiling_ohm``): a requirement above that would pass on an
    overload while the step states less than was asked for."""
    if required_ohm <= range_ohm:
        return ""
    over = format_quantity(range_ohm * OVERRANGE_FACTOR, "ohm", 3)
    full = format_quantity(range_ohm, "ohm", 3)
    return (
        f"{format_quantity(required_ohm, 'ohm', 3)} is more than the isolation range "
        f"(isolation_range) of {full} can prove: an overload there says only that a reading is "
        f"beyond the meter's overrange (about {over}, {OVERRANGE_FACTOR:.0%} of range, typical, "
        f"from memory), so rig credits it with the range's full scale, {full}; ask for at most "
        f"{full}, or give a harness-proof step a higher isolation_range"
    )


def _few(names: set[str]) -> str:
    ordered = sorted(names)
    return ", ".join(ordered[:8]) + (" ..." if len(ordered) > 8 else "")


def settings_from(spec: StepSpec, temp_c: float) -> HarnessSettings:
    return HarnessSettings(
        temp_c=temp_c,
        allowances=spec.params["allowances"],
        isolation_ohm=float(spec.params["isolation_ohm"]),
        method=str(spec.params["method"]),
        continuity_range_ohm=float(spec.params["continuity_range"]),
        isolation_range_ohm=float(spec.params["isolation_range"]),
        nplc=spec.nplc,
        net_limits=dict(spec.params["net_limits"]),
        rule=spec.rule,
    )


def report_outcome(report: HarnessReport, settings: HarnessSettings, unit: str) -> Outcome:
    """The step's value (findings, limit 0), the findings in words, and the figures as extras."""
    nets = {r.check.net for r in report.continuity}
    extras: dict[str, float] = {
        "nets": float(len(nets)),
        "islands": float(len(report.islands)),
        "temperature_c": settings.temp_c,
        "continuity_readings": float(report.continuity_readings),
        "isolation_readings": float(report.isolation_readings),
        "pairwise_readings": float(len(report.islands) * (len(report.islands) - 1) // 2),
    }
    for r in report.continuity + report.rejoined:
        key = f"net {r.check.net} {r.check.hi}>{r.check.lo}"
        extras[f"{key} ohm"] = r.value_ohm
        extras[f"{key} max_ohm"] = r.check.limit.max_ohm
        extras[f"{key} u_ohm"] = r.expanded_u_ohm  # the report judges the table by it, as here
    if report.isolation is not None:
        extras["isolation_proven_ohm"] = report.isolation.proven_ohm
        extras["isolation_required_ohm"] = settings.isolation_ohm
    for finding in report.findings:  # by kind, for the failure Pareto of rig stats
        key = f"found {finding.kind}"
        extras[key] = extras.get(key, 0.0) + 1.0
    words = [f.text for f in report.findings]
    if report.isolation is not None and math.isfinite(report.isolation.proven_ohm):
        which = "nets not named above" if words else "nets"
        words.append(
            f"isolation proved per pair of {which}: at least "
            f"{format_quantity(report.isolation.proven_ohm, 'ohm', 3)}, required "
            f"{format_quantity(settings.isolation_ohm, 'ohm', 3)} "
            f"({report.isolation_readings} readings, pair by pair "
            f"{int(extras['pairwise_readings'])})"
        )
    if report.isolation is None:  # a pass must not read as if the nets were proved apart
        words.append(f"isolation not tested (isolation_method {settings.method})")
    return Outcome(
        float(len(report.findings)),
        unit,
        0.0,
        Limits(None, 0.0),
        extras=extras,
        note="; ".join(words),
    )


TEMPERATURE_MEASURED = "temperature_measured"
"""The extras key that says where ``temperature_c`` came from: 1 read by an earlier step
(``temperature_from``), 0 stated; every copper limit is moved to it, so a record of a harness
must say which (records before it was kept lack the key)."""


def measured_ambient(spec: StepSpec) -> float:
    """1.0 where the step's ambient is an earlier step's reading, 0.0 where it is stated."""
    return 1.0 if spec.params.get("temperature_from") else 0.0


AMBIENT_LOW_C, AMBIENT_HIGH_C = 0.0, 50.0
"""A stated ambient a harness is plausibly tested at indoors: a cold unheated shop to a hot one
(common practice, no published source).  Outside it the figure is a slip (230 for 23.0), and the
copper limits moved to it would pass a poor crimp or fail good wires."""


CAPTURE_LIMITS = Limits(1.0, None)
"""A capture's value is the nets it found: none is a failure (a misplaced or unplugged harness,
or connectors that hold no wire), and no reference wire list is written from it."""


class HarnessProof(StepKind):
    """Prove a harness against its wire list (continuity, isolation, miswires)."""

    name = "harness-proof"
    unit = "faults"
    function = MeterFunction.RES_4W
    limits_in_meter_units = False
    overload_is_a_result = True

    def fixture_problems(self, spec: StepSpec, fixture: FixtureMap) -> list[tuple[str, str]]:
        """A capture's connectors must be ones the fixture can scan: a misspelt or foreign one
        is refused when the plan is built, not once the operator has started the run."""
        connectors = spec.params.get("capture_connectors") or []
        return [
            ("capture_connectors", p.message) for p in connector_problems(fixture, connectors, "")
        ]

    def data_file_problems(self, spec: StepSpec, fixture: FixtureMap) -> list[Problem]:
        """The wire list joined to the station's fixture: a pin the fixture lacks is named at
        the list's row, not at the step's line as a route the fixture cannot make."""
        wires = spec.params.get("wires")
        return join_problems(wires, fixture) if isinstance(wires, WireList) else []

    def parse(self, sec: Section, spec: StepSpec) -> None:
        read_harness_keys(sec, spec, sec.doc.path.parent)
        temperature_source(sec, spec)
        stated = spec.params.get("temperature_c")
        if stated is not None and not AMBIENT_LOW_C <= stated <= AMBIENT_HIGH_C:
            sec.problem(  # every copper limit is moved to it: a wrong one passes or fails all
                "temperature",
                f"expected an indoor ambient from {AMBIENT_LOW_C:g} degC to {AMBIENT_HIGH_C:g} "
                f"degC for a harness test, found {sec.raw('temperature')!r}",
            )
        # a capture must find at least one net: a golden harness connects something
        spec.limits = CAPTURE_LIMITS if spec.params.get("capture_to") else Limits(None, 0.0)

    def routes(self, spec: StepSpec) -> list[Route]:
        """Continuity (as 2-wire pairs) and the first isolation cuts, for planning: pins and
        interlocks are checked before the run; the adaptive readings are decided as it goes."""
        wires = spec.params.get("wires")
        if not isinstance(wires, WireList):
            return []
        routes = [Route.dmm(net.pins[0], other) for net in wires.nets for other in net.pins[1:]]
        firsts = [net.pins[0] for net in wires.nets]
        for j in range(cut_count(len(firsts))):
            hi, lo = cut_sides(len(firsts), j)
            routes.append(
                Route.ganged_dmm([firsts[i] for i in sorted(hi)], [firsts[i] for i in sorted(lo)])
            )
        return routes

    def run(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        if spec.params.get("capture_to"):
            return self._capture(ctx, spec)
        wires: WireList = spec.params["wires"]
        problems = join_problems(wires, ctx.fixture)
        if problems:
            raise ConfigError(problems)
        ctx.power(None)
        temp_c, _ = temperature_at(ctx, spec)
        settings = settings_from(spec, temp_c)
        report = scan_harness(ctx, wires, ctx.fixture, settings)
        outcome = report_outcome(report, settings, self.unit)
        outcome.extras[TEMPERATURE_MEASURED] = measured_ambient(spec)
        if wires.ignored:  # what the harness was proved against, in the record
            outcome.note = "; ".join(filter(None, (outcome.note, wires.ignored_note())))
        return outcome

    def _capture(self, ctx: StepContext, spec: StepSpec) -> Outcome:
        """Scan the fixture's pins, measure every join found and write them as a wire list;
        write nothing where no join is found."""
        connectors = spec.params.get("capture_connectors")
        problems = connector_problems(
            ctx.fixture, connectors or [], f"{spec.key}.capture_connectors"
        )
        if problems:
            raise ConfigError(problems)
        ctx.power(None)
        temp_c, _ = temperature_at(ctx, spec)
        settings = settings_from(spec, temp_c)
        pins = capture_pins(ctx.fixture, connectors)
        found = capture_harness(ctx, ctx.fixture, pins, settings)
        path: Path = spec.params["capture_to"]
        nets = len(found.discovery.groups)
        if nets:
            write_wire_list(
                path,
                found.rows,
                [
                    f"Captured by rig from a harness on fixture {ctx.fixture.name!r} at "
                    f"{temp_c:.1f} degC: {nets} nets on {len(pins)} pins.",
                    "Rows are measured paths from each net's first pin; measured_ohm includes "
                    "the contacts.",
                ],
            )
            note = f"wrote {len(found.rows)} rows of {nets} nets to {path}"
        else:
            note = (
                f"no two of the {len(pins)} pins scanned are joined: no nets found, nothing "
                f"written to {path} (is the harness on the fixture, on those connectors?)"
            )
        return Outcome(
            float(nets),
            "nets",
            0.0,
            CAPTURE_LIMITS,
            extras={
                "pins": float(len(pins)),
                "rows": float(len(found.rows)),
                "discovery_readings": float(len(found.discovery.readings)),
                "temperature_c": temp_c,
                TEMPERATURE_MEASURED: measured_ambient(spec),
            },
            note=note,
        )
