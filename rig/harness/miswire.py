"""Naming what is wrong with a harness in the words of its wire list (pure).

The scan ends with the harness as measured: which fixture pins are joined (continuity, then the
joins isolation found between islands).  Comparing that with the wire list's nets gives sentences:
a wire end on the wrong pin ("J2-5 reaches J3-7, expected J3-8"), two ends swapped, a pin cut off
at a splice, an open net, a net joined to another (a short) or to a spare pin, a net over its
resistance limit.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from dataclasses import dataclass

from rig.harness.continuity import ContinuityResult
from rig.harness.gauge_hint import gauge_hint
from rig.harness.isolation import Join
from rig.harness.wire_list import Net, WireList, WireRow
from rig.judge.decision import Verdict
from rig.quantity import format_quantity

KINDS = ("high-resistance", "open", "splice", "miswire", "swap", "short", "stray")


@dataclass(frozen=True)
class Finding:
    kind: str
    text: str
    pins: tuple[str, ...]
    nets: tuple[str, ...] = ()


def _ohm(value: float) -> str:
    return format_quantity(value, "ohm", 3)


def _connector(pin: str) -> str:
    return pin.rsplit("-", 1)[0]


def _pick(candidates: Iterable[str], near: str) -> str:
    """The candidate on the same connector as ``near`` if there is one, else the first."""
    ordered = sorted(candidates)
    same = [p for p in ordered if _connector(p) == _connector(near)]
    return (same or ordered)[0]


class _Harness:
    """The measured harness: islands of pins merged by the isolation joins."""

    def __init__(self, islands: Sequence[tuple[str, ...]], joins: Sequence[Join]) -> None:
        self.islands = islands
        parent = list(range(len(islands)))

        def find(i: int) -> int:
            while parent[i] != i:
                i = parent[i]
            return i

        for join in joins:
            parent[find(join.a)] = find(join.b)
        self.group_of_pin = {pin: find(i) for i, isl in enumerate(islands) for pin in isl}
        self.group_pins: dict[int, set[str]] = {}
        for pin, group in self.group_of_pin.items():
            self.group_pins.setdefault(group, set()).add(pin)
        self.island_of_pin = {pin: i for i, isl in enumerate(islands) for pin in isl}


def name_findings(
    wires: WireList,
    islands: Sequence[tuple[str, ...]],
    joins: Sequence[Join],
    continuity: Sequence[ContinuityResult],
    temp_c: float | None = None,
) -> list[Finding]:
    """Every fault the measurements show, in wire-list words; ``temp_c``, the ambient the
    limits were moved to, lets a reading over its limit be compared with smaller wire sizes."""
    measured = _Harness(islands, joins)
    net_of_pin = wires.net_of_pin()
    findings = _over_limit(continuity, wires, temp_c)
    reached = {frozenset((r.check.hi, r.check.lo)) for r in continuity if r.reached}
    findings += _weak_joins(measured, joins, net_of_pin, reached)
    misplaced: list[tuple[str, str, str, str]] = []
    for net in wires.nets:
        findings += _split(net, measured, misplaced)
    findings += _swaps_and_miswires(misplaced, {net.name: net for net in wires.nets})
    findings += _shorts(wires, measured, joins)
    return findings


def _wires(net: Net | None, a: str, b: str) -> str:
    """The wires between two pins of a net, as a technician finds them on the bench: by id, and
    colour where the list gives one (``wire W7, violet``); empty where the list cannot say."""
    if net is None:
        return ""
    try:
        rows = net.path(a, b)
    except (KeyError, ValueError):
        return ""
    return _named(rows)


def _named(rows: Sequence[WireRow]) -> str:
    if len(rows) == 1:
        row = rows[0]
        return f"wire {row.wire}, {row.colour}" if row.colour else f"wire {row.wire}"
    return f"wires {', '.join(r.wire for r in rows)}" if rows else ""


def _along(net: Net | None, a: str, b: str) -> str:
    """``_wires`` in brackets after a pin pair (`` (wire W7, violet)``), or empty."""
    found = _wires(net, a, b)
    return f" ({found})" if found else ""


def _net_words(net: Net) -> str:
    """A whole net by its pins and wires (``CAN_H (J1-3, J2-3: wire W3, red)``)."""
    wires = _named(net.rows)
    return f"{net.name} ({', '.join(net.pins)}{': ' + wires if wires else ''})"


def _over_limit(
    continuity: Sequence[ContinuityResult], wires: WireList, temp_c: float | None
) -> list[Finding]:
    """A finding per reading over its limit; or one for a net whose high readings all pass
    through one segment that no good reading passes through, high by about the same excess
    (``_high_segment``): a broken strand on a splice trunk is named as the trunk."""
    bad = (Verdict.FAIL, Verdict.CONDITIONAL_FAIL)
    nets = {net.name: net for net in wires.nets}
    high = [r for r in continuity if r.reached and r.verdict in bad]
    found = []
    for name in dict.fromkeys(r.check.net for r in high):
        net = nets.get(name)
        over = [r for r in high if r.check.net == name]
        good = [r for r in continuity if r.check.net == name and r.reached and r.verdict not in bad]
        segment = _high_segment(net, over, good) if net is not None else None
        if net is not None and segment is not None:
            found.append(_segment_finding(net, segment, over, temp_c))
        else:
            found += [_reading_finding(r, net, temp_c) for r in over]
    return found


def _reading_finding(r: ContinuityResult, net: Net | None, temp_c: float | None) -> Finding:
    hi, lo = r.check.hi, r.check.lo
    text = f"net {r.check.net}: {_reads(r, _along(net, hi, lo))}"
    return Finding("high-resistance", text + _hint(r, net, temp_c), (hi, lo), (r.check.net,))


def _reads(r: ContinuityResult, along: str = "") -> str:
    limit = _ohm(r.check.limit.max_ohm)
    return f"{r.check.hi} to {r.check.lo}{along} reads {_ohm(r.value_ohm)}, limit {limit}"


def _hint(r: ContinuityResult, net: Net | None, temp_c: float | None) -> str:
    """``: <gauge hint>`` where the reading fits a wire of the path a size smaller, else ""."""
    if net is None or temp_c is None:
        return ""
    hint = gauge_hint(
        net.path(r.check.hi, r.check.lo),
        r.value_ohm,
        r.expanded_u_ohm,
        temp_c,
        r.check.limit.allowance_ohm,
    )
    return f": {hint}" if hint else ""


def _high_segment(
    net: Net, over: Sequence[ContinuityResult], good: Sequence[ContinuityResult]
) -> WireRow | None:
    """The one row of a multi-row path that every high reading passes through and no good one
    does, where the high readings exceed their copper by about the same (each excess within
    the other's by both readings' U and the larger headroom of a good path over its copper,
    its contacts and splices); None where no single row explains them."""
    paths = [net.path(r.check.hi, r.check.lo) for r in over]
    if any(len(p) < 2 for p in paths):
        return None  # a single wire names itself already
    cleared = {row for r in good for row in net.path(r.check.hi, r.check.lo)}
    shared = [row for row in paths[0] if all(row in p for p in paths) and row not in cleared]
    if len(shared) != 1:
        return None
    for a in over:
        for b in over:
            excess = abs(
                (a.value_ohm - a.check.limit.conductor_ohm)
                - (b.value_ohm - b.check.limit.conductor_ohm)
            )
            headroom = max(_headroom(a), _headroom(b))
            if excess > a.expanded_u_ohm + b.expanded_u_ohm + headroom:
                return None
    return shared[0]


def _headroom(r: ContinuityResult) -> float:
    return max(r.check.limit.max_ohm - r.check.limit.conductor_ohm, 0.0)


def _segment_finding(
    net: Net, row: WireRow, over: Sequence[ContinuityResult], temp_c: float | None
) -> Finding:
    """One finding for the high readings one segment explains, named by that segment."""
    reads = ", ".join(_reads(r) for r in over)
    excess = max(r.value_ohm - r.check.limit.conductor_ohm for r in over)
    each = "" if len(over) < 2 else " on each path"
    text = (
        f"net {net.name}: {reads}: {_segment(row, 'high resistance')} ({_named([row])}), "
        f"about {_ohm(excess)} over the copper{each}"
    )
    pins = tuple(dict.fromkeys(p for r in over for p in (r.check.hi, r.check.lo)))
    return Finding("high-resistance", text + _hint(over[0], net, temp_c), pins, (net.name,))


def _weak_joins(
    measured: _Harness,
    joins: Sequence[Join],
    net_of_pin: dict[str, Net],
    reached: set[frozenset[str]],
) -> list[Finding]:
    """Two islands of one net joined only above the continuity range (a join read within it,
    in ``reached``, is judged against its limit as any continuity reading)."""
    found = []
    for join in joins:
        a, b = measured.islands[join.a][0], measured.islands[join.b][0]
        net_a, net_b = net_of_pin.get(a), net_of_pin.get(b)
        if net_a is not None and net_a is net_b and frozenset((a, b)) not in reached:
            a, b = sorted((a, b), key=net_a.pins.index)
            text = f"net {net_a.name}: {a} reaches {b}"
            weak = f"only through {_ohm(join.r_ohm)}, above the continuity range"
            row = _weak_segment(net_a, a, b, reached)
            if row is None:
                text += f"{_along(net_a, a, b)} {weak}"
            else:
                text += f" {weak}: {_segment(row, 'high resistance')} ({_named([row])})"
            found.append(Finding("high-resistance", text, (a, b), (net_a.name,)))
    return found


def _weak_segment(net: Net, a: str, b: str, reached: set[frozenset[str]]) -> WireRow | None:
    """The one row that explains a weak join from ``a`` to ``b`` along several rows: the pins
    joined to ``a`` within the continuity range and those joined to ``b`` make up the net, and
    one row alone separates them (a broken strand on a splice trunk is named as the trunk, as
    an open one is); None where that does not hold."""
    if len(net.path(a, b)) < 2:
        return None
    sides = [_joined(net, pin, reached) for pin in (a, b)]
    if sides[0] & sides[1] or sides[0] | sides[1] != set(net.pins):
        return None
    rows = net.separating_rows(sides[0])
    return rows[0] if len(rows) == 1 else None


def _joined(net: Net, pin: str, reached: set[frozenset[str]]) -> set[str]:
    """The pins of ``net`` that readings within the continuity range join to ``pin``."""
    found = {pin}
    grew = True
    while grew:
        more = {p for p in net.pins if any(frozenset((p, q)) in reached for q in found)}
        grew = not more <= found
        found |= more
    return found


def _split(
    net: Net, measured: _Harness, misplaced: list[tuple[str, str, str, str]]
) -> list[Finding]:
    """A net whose pins are not all joined: a misplaced end, a cut-off splice branch, an open."""
    parts: dict[int, list[str]] = {}
    for pin in net.pins:
        parts.setdefault(measured.group_of_pin[pin], []).append(pin)
    if len(parts) < 2:
        return []
    main = max(parts, key=lambda g: (len(parts[g]), net.pins[0] in parts[g]))
    found = []
    for group, pins in parts.items():
        if group == main:
            continue
        b = pins[0]
        a = min(parts[main], key=lambda p: len(net.path(p, b)))
        foreign_main = measured.group_pins[main] - set(net.pins)
        foreign_part = measured.group_pins[group] - set(net.pins)
        if foreign_main:
            misplaced.append((a, _pick(foreign_main, b), b, net.name))
        elif foreign_part:
            misplaced.append((b, _pick(foreign_part, a), a, net.name))
        else:
            found.append(_cut_off(net, pins, parts[main], a, b))
    return found


def _cut_off(net: Net, pins: list[str], rest: list[str], a: str, b: str) -> Finding:
    """``pins`` of ``net`` reach none of ``rest`` (``a`` of the rest is nearest ``b`` of them):
    named by the segment whose open alone explains it, so that a trunk open between a connector
    and its splice is named as the trunk, not as the good branches beyond the splice."""
    rows = net.separating_rows(pins)
    along = f" ({_named(rows)})" if rows else _along(net, a, b)
    cut_off = f"{', '.join(pins)} does not reach {', '.join(rest)} of net {net.name}"
    if len(rows) == 1 and any(end.is_splice for end in rows[0].ends):
        return Finding(
            "splice", f"{cut_off}: {_segment(rows[0])}{along}", (*pins, *rest), (net.name,)
        )
    splices = net.splices_between(a, b)
    if splices:
        return Finding(
            "splice",
            f"{cut_off}: missing splice or broken branch at splice {splices[-1]}{along}",
            (*pins, *rest),
            (net.name,),
        )
    return Finding(
        "open", f"net {net.name} open: {a} does not reach {b}{along}", (a, b), (net.name,)
    )


def _segment(row: WireRow, what: str = "open") -> str:
    """Where a row with a splice end is ``what`` (open, high resistance), in the words of its
    ends."""
    splices = [end.name for end in row.ends if end.is_splice]
    if len(splices) == 2:
        return f"{what} between splices {splices[0]} and {splices[1]}, or at either splice"
    if not splices:
        return f"{what} between {row.start.name} and {row.end.name}, or at either end"
    pin = next(end.name for end in row.ends if not end.is_splice)
    return f"{what} between {pin} and splice {splices[0]}, or at the splice"


def _swaps_and_miswires(
    misplaced: list[tuple[str, str, str, str]], nets: dict[str, Net]
) -> list[Finding]:
    """Pair up 'a reaches d, expected b' with 'c reaches b, expected d': a swap.  Each end is
    named with the wire that should run from ``a`` to ``b``."""

    def wire(a: str, b: str, net: str, after: str) -> str:
        found = _wires(nets.get(net), a, b)
        return f"{found}{after}" if found else ""

    found = []
    used: set[int] = set()
    for i, (a, q, b, net) in enumerate(misplaced):
        if i in used:
            continue
        partner = next(
            (
                j
                for j, (_, q2, b2, _) in enumerate(misplaced)
                if j != i and j not in used and q2 == b and b2 == q
            ),
            None,
        )
        if partner is not None:
            c, _, d, other = misplaced[partner]
            used |= {i, partner}
            found.append(
                Finding(
                    "swap",
                    f"{b} and {d} are swapped ({wire(a, b, net, ': ')}{a} reaches {d}, "
                    f"expected {b}, and {wire(c, d, other, ': ')}{c} reaches {b}, expected {d})",
                    (a, b, c, d),
                    (net, other),
                )
            )
        else:
            used.add(i)
            along = ", ".join(filter(None, (f"net {net}", wire(a, b, net, ""))))
            found.append(
                Finding(
                    "miswire",
                    f"{a} reaches {q}, expected {b} ({along})",
                    (a, q, b),
                    (net,),
                )
            )
    return found


def _shorts(wires: WireList, measured: _Harness, joins: Sequence[Join]) -> list[Finding]:
    """Whole nets joined to each other (a short) or to spare pins (a stray connection)."""
    found = []
    for group, pins in measured.group_pins.items():
        whole = [net for net in wires.nets if set(net.pins) <= pins]
        partial = [net for net in wires.nets if set(net.pins) & pins and not set(net.pins) <= pins]
        spare = sorted(p for p in pins if p not in wires.net_of_pin())
        r = _join_r(measured, joins, group)
        if len(whole) >= 2:
            names = " and ".join(_net_words(n) for n in whole)
            found.append(
                Finding(
                    "short",
                    f"nets {names} are joined ({r}): a short between them",
                    tuple(n.pins[0] for n in whole),
                    tuple(n.name for n in whole),
                )
            )
        if whole and spare and not partial:
            found.append(
                Finding(
                    "stray",
                    f"net {whole[0].name} also reaches {', '.join(spare)}, where no wire is "
                    f"expected ({r})",
                    (whole[0].pins[0], *spare),
                    (whole[0].name,),
                )
            )
    return found


def _join_r(measured: _Harness, joins: Sequence[Join], group: int) -> str:
    inside = [j for j in joins if measured.group_of_pin[measured.islands[j.a][0]] == group]
    return ", ".join(_ohm(j.r_ohm) for j in inside) or "no reading"
