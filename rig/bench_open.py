"""Open a station's instruments through their drivers, refusing past-due calibration."""

from __future__ import annotations

import datetime as dt

from drivers.base import Dmm, Instrument, InstrumentIdentity, RelayBox, Supply
from drivers.registry import open_instrument
from rig.bench_identity import BenchRefused, ask_identity, identity_problems
from rig.config.station import Station
from rig.engine import Bench
from rig.errors import RigError
from rig.judge.reference_probe import PROBE_ROLE


class CalibrationPastDue(RigError):
    """An instrument's calibration is past due and the station file does not allow it."""


def check_calibration(
    station: Station, today: dt.date | None = None, *, reads_probe: bool = True
) -> list[str]:
    """Refuse past-due instruments or a past-due reference probe unless the station allows each
    by name, naming every one at once (met one at a time, each would cost a trip to the bench);
    returns notes.  The probe counts only where the sequence reads it (``reads_probe``): a
    past-due thermometer does not stop a sequence that never uses it."""
    today = today or dt.date.today()
    dated = [
        (role, config.resource, config.calibration_due, config.allow_past_due)
        for role, config in station.instruments.items()
    ]
    probe = station.reference_probe
    if probe is not None and reads_probe:
        dated.append((PROBE_ROLE, probe.identity, probe.calibration_due, probe.allow_past_due))
    notes, refused = [], []
    for role, name, due, allowed in dated:
        if due is None or due >= today:
            continue
        if allowed:
            notes.append(
                f"{role} calibration past due since {due.isoformat()} (allowed by station)"
            )
        else:
            refused.append((role, name, due))
    if refused:
        items = "; ".join(
            f"{role} ({name}) was due for calibration on {due.isoformat()}"
            for role, name, due in refused
        )
        keys = ", ".join(f"[{role}]" for role, _, _ in refused)
        raise CalibrationPastDue(
            f"{items}; have {'it' if len(refused) == 1 else 'them'} recalibrated; only whoever "
            "answers for the station's calibration may allow it meanwhile (allow_past_due = "
            f"true under {keys} in {station.path})"
        )
    return notes


def open_bench(station: Station) -> Bench:
    """Open DMM, supply and relay box and prove each is there and is the one the station names
    (``BenchRefused`` before any run otherwise); closes what was opened if a later one fails."""
    opened: list[Instrument] = []
    try:
        found: dict[str, Instrument] = {}
        identities: dict[str, InstrumentIdentity] = {}
        for role, expected in (("dmm", Dmm), ("supply", Supply), ("relay_box", RelayBox)):
            config = station.instruments[role]
            instrument = open_instrument(config.driver, role, config.resource, config.settings)
            opened.append(instrument)
            if not isinstance(instrument, expected):
                raise RigError(
                    f"driver {config.driver!r} for [{role}] is not a {expected.__name__} driver"
                )
            found[role] = instrument
            identities[role] = _identity(station, role, instrument)
        _check_identities(station, identities)
        _check_box_size(station, found["relay_box"])  # type: ignore[arg-type]
    except BaseException:
        for instrument in opened:
            instrument.close()
        raise
    return Bench(found["dmm"], found["supply"], found["relay_box"], identities)  # type: ignore[arg-type]


def _refusal(station: Station, problems: list[tuple[str, str]]) -> BenchRefused:
    """The refusal of a bench, each problem with its role and address, then the file to fix."""
    said = "; ".join(
        f"[{role}] at {station.instruments[role].resource}: {text}" for role, text in problems
    )
    return BenchRefused(f"{said} (station file {station.path}); nothing was run")


def _identity(station: Station, role: str, instrument: Instrument) -> InstrumentIdentity:
    try:
        return ask_identity(role, instrument)
    except BenchRefused as exc:
        raise _refusal(station, [(role, str(exc))]) from exc.__cause__


def _check_identities(station: Station, identities: dict[str, InstrumentIdentity]) -> None:
    expected = {role: c.expect_identity for role, c in station.instruments.items()}
    problems = identity_problems(identities, expected)
    if problems:
        raise _refusal(station, problems)


def _check_box_size(station: Station, box: RelayBox) -> None:
    """Refuse a fixture map that needs more relays, or more closed at once, than the box has:
    a route on a relay it lacks would otherwise fail in the middle of a run."""
    fixture = station.fixture
    short = [
        f"{key} = {needed}"
        for key, needed, has in (
            ("relay_count", fixture.relay_count, box.relay_count),
            ("max_closed", fixture.max_closed, box.max_closed),
        )
        if has is not None and needed > has
    ]
    if short:
        problem = (
            f"the box reports {box.relay_count} relays, at most {box.max_closed} closed at once, "
            f"but fixture {fixture.name!r} ({fixture.path}) states {', '.join(short)}: correct "
            "the fixture file or connect the box it was written for"
        )
        raise _refusal(station, [("relay_box", problem)])


def close_bench(bench: Bench) -> None:
    for instrument in bench.all():
        instrument.close()
