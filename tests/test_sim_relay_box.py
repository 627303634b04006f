"""The simulated relay box, driven by raw pyserial on its pseudo-terminal (no driver between)."""

from __future__ import annotations

import time
from collections.abc import Iterator

import pytest
import serial
from polling import wait_for

from drivers.relay_frames import (
    MAX_COMMAND_LINE,
    Command,
    ErrorCode,
    FrameError,
    Reply,
    WatchdogMode,
    crc8,
    decode_reply,
    encode_command,
    parse_counts,
    parse_info,
    parse_state,
)
from rig.sim.sim_relay_box import SimRelayBox
from rig.sim.timing import BenchClock, Timing

pytestmark = pytest.mark.timeout(30)


class Link:
    """A raw host: pyserial on the box's pty, frames built with the shared codec."""

    def __init__(self, path: str) -> None:
        self.port = serial.Serial(path, 115200, timeout=0.2, exclusive=True)
        self.seq = 0x100

    def raw(self, data: bytes) -> bytes:
        self.port.write(data)
        return bytes(self.port.read_until(b"\n"))

    def send(self, verb: str, arg: str = "") -> Reply:
        self.seq += 1
        reply = decode_reply(self.raw(encode_command(Command(self.seq, verb, arg))))
        if reply.seq is not None:
            assert reply.seq == self.seq
        return reply

    def ok(self, verb: str, arg: str = "") -> str:
        reply = self.send(verb, arg)
        assert reply.ok, reply
        return reply.payload

    def refused(self, verb: str, arg: str = "") -> int:
        reply = self.send(verb, arg)
        assert not reply.ok, reply
        return reply.code

    def close(self) -> None:
        self.port.close()


@pytest.fixture
def changes() -> list[float]:
    return []


@pytest.fixture
def box(changes: list[float]) -> Iterator[SimRelayBox]:
    sim = SimRelayBox(
        relay_count=8,
        max_closed=3,
        clock=BenchClock(),
        on_change=lambda: changes.append(time.monotonic()),
        identity="rig,test-box,T-1,0.1",
    )
    sim.start()
    yield sim
    sim.stop()


@pytest.fixture
def link(box: SimRelayBox) -> Iterator[Link]:
    client = Link(box.port_path)
    yield client
    client.close()


def sealed(body: bytes) -> bytes:
    return body + b"*" + f"{crc8(body):02X}".encode() + b"\n"


# ---- basics -----------------------------------------------------------------------------------


def test_start_returns_the_tty_path(box: SimRelayBox) -> None:
    assert box.port_path.startswith("/dev/")
    with pytest.raises(RuntimeError):
        box.start()


def test_identity(link: Link) -> None:
    info = parse_info(link.ok("WHO"))
    assert (info.relays, info.budget, info.identity) == (8, 3, "rig,test-box,T-1,0.1")


def test_set_and_read_back(box: SimRelayBox, link: Link, changes: list[float]) -> None:
    state = parse_state(link.ok("SET", "1,4,8"))
    assert state.closed == {1, 4, 8}
    assert box.closed() == {1, 4, 8}
    assert parse_state(link.ok("STATE")).closed == {1, 4, 8}
    assert changes  # the bench was told
    assert parse_state(link.ok("OPENALL")).closed == frozenset()
    assert box.closed() == frozenset()


def test_set_is_idempotent(box: SimRelayBox, link: Link) -> None:
    link.ok("SET", "2,3")
    events = len(box.events())
    link.ok("SET", "3,2")
    assert len(box.events()) == events
    assert box.operation_counts()[2] == 1


def test_break_before_make_order(box: SimRelayBox, link: Link) -> None:
    link.ok("SET", "1,2")
    start = len(box.events())
    link.ok("SET", "2,3,4")
    change = box.events()[start:]
    assert [(e.action, e.relay) for e in change] == [("open", 1), ("close", 3), ("close", 4)]
    assert all(e.cause == "command" for e in change)


def test_break_before_make_waits_release_then_operate() -> None:
    with SimRelayBox(
        relay_count=4, max_closed=2, clock=BenchClock(Timing.REAL), operate_s=0.04, release_s=0.03
    ) as sim:
        client = Link(sim.port_path)
        try:
            client.ok("SET", "1")
            before = time.monotonic()
            client.ok("SET", "2")
            opened, closed = sim.events()[-2:]
        finally:
            client.close()
    assert (opened.action, opened.relay, closed.action, closed.relay) == ("open", 1, "close", 2)
    # lower bounds from sleeping: the contact opens after its release time, the new one closes
    # an operate time after that
    assert opened.t - before >= 0.03
    assert closed.t - opened.t >= 0.04


# ---- refusals change nothing ------------------------------------------------------------------


def test_coil_budget_refused_and_nothing_changed(box: SimRelayBox, link: Link) -> None:
    link.ok("SET", "1")
    counts, events = box.operation_counts(), len(box.events())
    assert link.refused("SET", "2,3,4,5") == ErrorCode.COIL_BUDGET
    assert box.closed() == {1}
    assert box.operation_counts() == counts
    assert len(box.events()) == events


@pytest.mark.parametrize("relays", ["9", "0", "1,99"])
def test_unknown_relay_refused(box: SimRelayBox, link: Link, relays: str) -> None:
    link.ok("SET", "5")
    assert link.refused("SET", relays) == ErrorCode.UNKNOWN_RELAY
    assert box.closed() == {5}


@pytest.mark.parametrize(
    ("raw", "code", "seq_echoed"),
    [
        (b"hello\n", ErrorCode.MALFORMED, False),
        (b"0001 SET 1\n", ErrorCode.MALFORMED, False),  # no checksum
        (b"0001 SET 1\xff*00\n", ErrorCode.MALFORMED, False),
        (sealed(b"0042 FLIP 1"), ErrorCode.UNKNOWN_VERB, True),
        (sealed(b"0042 SET 1,,2"), ErrorCode.BAD_ARGUMENT, True),
        (sealed(b"0042 SET 1,1"), ErrorCode.BAD_ARGUMENT, True),
        (sealed(b"0042 SET"), ErrorCode.BAD_ARGUMENT, True),
        (sealed(b"0042 OPENALL 3"), ErrorCode.BAD_ARGUMENT, True),
        (sealed(b"0042 set 1"), ErrorCode.MALFORMED, True),
        (sealed(b"0042 WDARM 5"), ErrorCode.OUT_OF_RANGE, True),
    ],
)
def test_malformed_commands_refused_with_no_change(
    box: SimRelayBox, link: Link, raw: bytes, code: ErrorCode, seq_echoed: bool
) -> None:
    link.ok("SET", "2")
    counts = box.operation_counts()
    reply = decode_reply(link.raw(raw))
    assert not reply.ok
    assert reply.code == code
    assert reply.seq == (0x42 if seq_echoed else None)
    assert box.closed() == {2}
    assert box.operation_counts() == counts


def test_corrupted_command_refused_with_no_change(box: SimRelayBox, link: Link) -> None:
    link.ok("SET", "2")
    frame = bytearray(encode_command(Command(9, "SET", "3")))
    frame[frame.index(b"3")] = ord("4")  # damaged on the line, checksum left as it was
    reply = decode_reply(link.raw(bytes(frame)))
    assert (reply.ok, reply.code, reply.seq) == (False, ErrorCode.BAD_CHECKSUM, None)
    assert box.closed() == {2}


def test_overlong_line_refused_then_box_recovers(box: SimRelayBox, link: Link) -> None:
    reply = decode_reply(link.raw(b"7" * (MAX_COMMAND_LINE * 3) + b"\n"))
    assert reply.code == ErrorCode.LINE_TOO_LONG
    assert link.port.read_until(b"\n") == b""  # the rest of that line is dropped silently
    assert parse_state(link.ok("STATE")).closed == frozenset()


def test_empty_lines_are_ignored(link: Link) -> None:
    assert link.raw(b"\n\n") == b""
    assert parse_info(link.ok("WHO")).relays == 8


# ---- watchdog ---------------------------------------------------------------------------------


def test_watchdog_trips_after_silence(box: SimRelayBox, link: Link, changes: list[float]) -> None:
    link.ok("SET", "1,2")
    assert parse_state(link.ok("WDARM", "100")).watchdog is WatchdogMode.ARMED
    notified = len(changes)
    assert wait_for(lambda: box.watchdog_tripped)  # nothing sent: the timer alone trips it
    # a trip refuses closing at once and opens every relay in its release time, so the flag
    # may be seen before the contacts have opened
    assert wait_for(lambda: box.closed() == frozenset())
    assert wait_for(lambda: len(changes) > notified)
    assert {(e.relay, e.action, e.cause) for e in box.events()[-2:]} == {
        (1, "open", "watchdog"),
        (2, "open", "watchdog"),
    }
    state = parse_state(link.ok("STATE"))
    assert (state.closed, state.watchdog) == (frozenset(), WatchdogMode.TRIPPED)
    assert link.ok("BEAT") == "tripped"
    # until cleared, nothing may close; opening everything is still allowed
    assert link.refused("SET", "3") == ErrorCode.WATCHDOG_TRIPPED
    link.ok("OPENALL")
    assert parse_state(link.ok("WDOFF")).watchdog is WatchdogMode.OFF
    assert not box.watchdog_tripped
    link.ok("SET", "3")
    assert box.closed() == {3}


def test_watchdog_trips_with_no_client_at_all(box: SimRelayBox, link: Link) -> None:
    link.ok("SET", "4")
    link.ok("WDARM", "100")
    link.close()
    assert wait_for(lambda: box.watchdog_tripped)
    assert box.closed() == frozenset()


def test_heartbeats_keep_the_watchdog_fed(box: SimRelayBox, link: Link) -> None:
    link.ok("SET", "1")
    link.ok("WDARM", "400")
    end = time.monotonic() + 1.2  # three watchdog periods
    while time.monotonic() < end:
        assert link.ok("BEAT") == "armed"
        time.sleep(0.05)
    assert not box.watchdog_tripped
    assert box.closed() == {1}
    assert parse_state(link.ok("WDOFF")).watchdog is WatchdogMode.OFF


def test_rearming_clears_a_trip(box: SimRelayBox, link: Link) -> None:
    link.ok("WDARM", "50")
    assert wait_for(lambda: box.watchdog_tripped)
    state = parse_state(link.ok("WDARM", "5000"))
    assert (state.watchdog, state.watchdog_ms) == (WatchdogMode.ARMED, 5000)


# ---- counters, reconnect ----------------------------------------------------------------------


def test_operation_counters(box: SimRelayBox, link: Link) -> None:
    link.ok("SET", "1,2")
    link.ok("SET", "2,3")
    link.ok("OPENALL")
    expected = {1: 2, 2: 2, 3: 2, 4: 0, 5: 0, 6: 0, 7: 0, 8: 0}
    assert box.operation_counts() == expected
    assert parse_counts(link.ok("COUNTS")) == [expected[r] for r in range(1, 9)]


def test_reconnect_after_client_closes(box: SimRelayBox) -> None:
    first = Link(box.port_path)
    first.ok("SET", "6")
    first.close()
    second = Link(box.port_path)
    try:
        assert parse_state(second.ok("STATE")).closed == {6}
    finally:
        second.close()


# ---- faults -----------------------------------------------------------------------------------


def test_unknown_fault_kind_lists_the_known_ones(box: SimRelayBox) -> None:
    with pytest.raises(ValueError, match="bad_checksum, no_ack, close_pty"):
        box.inject_fault("smoke")
    with pytest.raises(ValueError, match="count"):
        box.inject_fault("no_ack", 0)


def test_bad_checksum_fault_corrupts_the_next_replies(link: Link, box: SimRelayBox) -> None:
    box.inject_fault("bad_checksum", 2)
    for _ in range(2):
        with pytest.raises(FrameError) as caught:
            decode_reply(link.raw(encode_command(Command(1, "STATE"))))
        assert caught.value.code is ErrorCode.BAD_CHECKSUM
    assert link.ok("STATE")


def test_persistent_fault_lasts_until_cleared(link: Link, box: SimRelayBox) -> None:
    box.inject_fault("bad_checksum", None)
    for _ in range(3):
        with pytest.raises(FrameError):
            decode_reply(link.raw(encode_command(Command(1, "STATE"))))
    box.clear_faults()
    assert link.ok("STATE")


def test_no_ack_fault_executes_but_does_not_answer(link: Link, box: SimRelayBox) -> None:
    box.inject_fault("no_ack")
    assert link.raw(encode_command(Command(1, "SET", "7"))) == b""
    assert box.closed() == {7}
    assert parse_state(link.ok("STATE")).closed == {7}


def test_close_pty_fault_makes_the_box_vanish(link: Link, box: SimRelayBox) -> None:
    link.ok("SET", "1")
    box.inject_fault("close_pty")
    with pytest.raises(serial.SerialException):
        link.raw(encode_command(Command(1, "STATE")))
    box.stop()
    box.stop()  # idempotent


def test_constructor_checks_its_arguments() -> None:
    clock = BenchClock()
    with pytest.raises(ValueError, match="max_closed"):
        SimRelayBox(relay_count=4, max_closed=5, clock=clock)
    with pytest.raises(ValueError, match="relay_count"):
        SimRelayBox(relay_count=0, max_closed=0, clock=clock)
    with pytest.raises(ValueError, match="identity"):
        SimRelayBox(relay_count=4, max_closed=1, clock=clock, identity="a*b")
