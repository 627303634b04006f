"""The serial relay-box driver against the simulated box on a real pseudo-terminal."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import textwrap
import threading
import time
import tty
from collections.abc import Callable, Iterator

import pytest
from polling import wait_for

from drivers.relay_frames import (
    BoxInfo,
    BoxState,
    ErrorCode,
    Reply,
    Verb,
    WatchdogMode,
    decode_command,
    encode_reply,
    format_info,
    format_state,
)
from drivers.relay_serial import SerialRelayBox
from rig.errors import (
    ConfigError,
    InstrumentConnectionLost,
    InstrumentError,
    InstrumentProtocolError,
    InstrumentReportedError,
    InstrumentTimeout,
)
from rig.sim.sim_relay_box import SimRelayBox
from rig.sim.timing import BenchClock, Timing

pytestmark = pytest.mark.timeout(30)
SETTINGS = {"timeout_ms": 200}


@pytest.fixture
def sim() -> Iterator[SimRelayBox]:
    box = SimRelayBox(relay_count=8, max_closed=3, clock=BenchClock(), identity="rig,tb8,S-7,2.1")
    box.start()
    yield box
    box.stop()


@pytest.fixture
def box(sim: SimRelayBox) -> Iterator[SerialRelayBox]:
    driver = SerialRelayBox("relays", sim.port_path, SETTINGS)
    yield driver
    driver.close()


# ---- normal use -------------------------------------------------------------------------------


def test_identity_and_size(box: SerialRelayBox) -> None:
    ident = box.identity()
    assert (ident.manufacturer, ident.model, ident.serial, ident.firmware) == (
        "rig",
        "tb8",
        "S-7",
        "2.1",
    )
    assert (box.relay_count, box.max_closed) == (8, 3)


def test_identity_is_the_one_given_on_opening(sim: SimRelayBox, box: SerialRelayBox) -> None:
    # the WHO reply read on opening is kept: a run's record costs no serial round trip for it
    handled = sim.lines_handled
    assert box.identity().serial == "S-7"
    assert sim.lines_handled == handled
    box.closed_relays()  # the counter does count what is asked (so the check above can fail)
    assert sim.lines_handled == handled + 1


def test_apply_and_read_back(sim: SimRelayBox, box: SerialRelayBox) -> None:
    box.apply([3, 1])
    assert sim.closed() == {1, 3}
    assert box.closed_relays() == {1, 3}
    box.apply({1, 5})
    assert sim.closed() == {1, 5}
    box.open_all()
    assert sim.closed() == frozenset()
    assert box.closed_relays() == frozenset()


def test_relays_that_stay_closed_are_not_touched(sim: SimRelayBox, box: SerialRelayBox) -> None:
    box.apply([1, 2])
    start = len(sim.events())
    box.apply([2, 3])
    change = sim.events()[start:]
    assert [(e.action, e.relay) for e in change] == [("open", 1), ("close", 3)]


def test_break_before_make(sim: SimRelayBox, box: SerialRelayBox) -> None:
    box.apply([1, 2, 3])
    start = len(sim.events())
    box.apply([4, 5, 6])
    actions = [e.action for e in sim.events()[start:]]
    assert actions == ["open"] * 3 + ["close"] * 3


def test_coil_budget_refused_and_nothing_changed(sim: SimRelayBox, box: SerialRelayBox) -> None:
    box.apply([1])
    counts = box.operation_counts()
    with pytest.raises(InstrumentReportedError) as caught:
        box.apply([1, 2, 3, 4])
    error = caught.value
    assert error.code == ErrorCode.COIL_BUDGET
    assert (error.instrument, error.resource, error.command) == (
        "relays",
        sim.port_path,
        "SET 1,2,3,4",
    )
    assert "coil budget is 3" in str(error)
    assert sim.closed() == {1}
    assert box.closed_relays() == {1}
    assert box.operation_counts() == counts


def test_unknown_relay_refused(sim: SimRelayBox, box: SerialRelayBox) -> None:
    box.apply([2])
    with pytest.raises(InstrumentReportedError) as caught:
        box.apply([2, 9])
    assert caught.value.code == ErrorCode.UNKNOWN_RELAY
    assert "relays are 1..8" in str(caught.value)
    assert sim.closed() == {2}


@pytest.mark.parametrize("bad", ["1", 1.0, True, -1])
def test_relay_numbers_must_be_whole_numbers(
    sim: SimRelayBox, box: SerialRelayBox, bad: object
) -> None:
    with pytest.raises(InstrumentError, match="whole numbers"):
        box.apply([bad])  # type: ignore[list-item]
    assert sim.closed() == frozenset()


def test_operation_counts(sim: SimRelayBox, box: SerialRelayBox) -> None:
    box.apply([1, 2])
    box.apply([2, 3])
    box.apply([2, 3])  # no movement
    box.open_all()
    expected = {1: 2, 2: 2, 3: 2, 4: 0, 5: 0, 6: 0, 7: 0, 8: 0}
    assert box.operation_counts() == expected
    assert sim.operation_counts() == expected
    assert box.box_counts() == expected


def test_reconnect_after_close(sim: SimRelayBox) -> None:
    first = SerialRelayBox("relays", sim.port_path, SETTINGS)
    first.apply([4])
    first.close()
    second = SerialRelayBox("relays", sim.port_path, SETTINGS)
    try:
        assert second.closed_relays() == {4}
    finally:
        second.close()


def test_port_is_exclusive(sim: SimRelayBox, box: SerialRelayBox) -> None:
    with pytest.raises(InstrumentConnectionLost, match="cannot open"):
        SerialRelayBox("other", sim.port_path, SETTINGS)


def test_missing_port() -> None:
    with pytest.raises(InstrumentConnectionLost) as caught:
        SerialRelayBox("relays", "/dev/does-not-exist-rig", SETTINGS)
    assert caught.value.resource == "/dev/does-not-exist-rig"


def test_bad_settings_are_named() -> None:
    with pytest.raises(ConfigError) as caught:
        SerialRelayBox("relays", "/dev/null", {"timeout_ms": "fast", "baud": 9600})
    keys = {p.key for p in caught.value.problems}
    assert keys == {"timeout_ms", "baud"}
    assert "positive number of ms" in str(caught.value)


# ---- watchdog ---------------------------------------------------------------------------------


def test_heartbeat_keeps_the_watchdog_from_tripping(sim: SimRelayBox, box: SerialRelayBox) -> None:
    box.apply([1, 2])
    box.start_watchdog(0.6)
    assert box.watchdog_state().watchdog is WatchdogMode.ARMED
    time.sleep(1.8)  # three watchdog periods with no command from us
    assert not sim.watchdog_tripped
    assert sim.closed() == {1, 2}
    assert box.heartbeat_error is None
    box.stop_watchdog()
    assert box.watchdog_state().watchdog is WatchdogMode.OFF


def test_commands_while_heartbeat_runs_do_not_interleave(
    sim: SimRelayBox, box: SerialRelayBox
) -> None:
    box.start_watchdog(0.06)  # heartbeat every 20 ms
    for n in range(60):
        box.apply([1 + n % 8])
    box.stop_watchdog()
    assert box.heartbeat_error is None
    assert box.retries == 0
    assert not sim.watchdog_tripped


def test_no_beat_follows_the_watchdog_switched_off(sim: SimRelayBox, box: SerialRelayBox) -> None:
    # Once stop_watchdog has returned the heartbeat's thread is gone and the box hears nothing
    # more from it (docs/relay-box-protocol.md, host side).
    box.start_watchdog(0.03)  # a beat every 10 ms
    assert wait_for(lambda: sim.lines_handled >= 4)  # WHO, state, WDARM, and beats
    box.stop_watchdog()
    handled = sim.lines_handled
    assert wait_for(
        lambda: not any(t.name.startswith("relay-box heartbeat") for t in threading.enumerate())
    )
    time.sleep(0.05)  # five beat periods
    assert sim.lines_handled == handled
    assert box.watchdog_state().watchdog is WatchdogMode.OFF


def test_a_beat_held_up_by_the_switch_off_is_not_sent(
    sim: SimRelayBox, box: SerialRelayBox
) -> None:
    # A beat falls due while the switch-off holds the command lock: once the lock is free the
    # heartbeat must see it was told to stop, or a watchdog whose WDOFF failed is fed once more.
    # (The lock and the stop event are the driver's own; the test takes them as stop_watchdog
    # does, and holds the lock across several beat periods so that a beat is surely waiting.)
    box.start_watchdog(0.03)  # a beat every 10 ms
    assert wait_for(lambda: sim.lines_handled >= 4)
    beat, thread = box._beat_stop, box._beat_thread
    assert beat is not None and thread is not None
    with box._lock:
        time.sleep(0.05)  # the heartbeat is now waiting for the lock
        beat.set()
        box._transact(Verb.WDOFF)
        handled = sim.lines_handled
    thread.join(timeout=2)
    assert not thread.is_alive()
    assert sim.lines_handled == handled  # no BEAT after the WDOFF
    box._stop_heartbeat()


def test_watchdog_out_of_range_is_refused_by_the_box(box: SerialRelayBox) -> None:
    with pytest.raises(InstrumentReportedError) as caught:
        box.start_watchdog(0.001)
    assert caught.value.code == ErrorCode.OUT_OF_RANGE
    with pytest.raises(InstrumentError, match="positive number of seconds"):
        box.start_watchdog(-1.0)


def test_watchdog_trips_when_the_host_process_dies(sim: SimRelayBox) -> None:
    host = textwrap.dedent(
        f"""
        import sys, time
        from drivers.relay_serial import SerialRelayBox
        box = SerialRelayBox("relays", {sim.port_path!r}, {{"timeout_ms": 200}})
        box.apply([1, 3])
        box.start_watchdog(0.3)
        print("ready", flush=True)
        time.sleep(60)
        """
    )
    proc = subprocess.Popen([sys.executable, "-c", host], stdout=subprocess.PIPE, text=True)
    try:
        assert proc.stdout is not None
        assert proc.stdout.readline().strip() == "ready"
        assert sim.closed() == {1, 3}
        proc.kill()
        proc.wait()
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()
    assert wait_for(lambda: sim.watchdog_tripped)
    assert sim.closed() == frozenset()
    # the next session sees the trip, notes it and starts clean
    after = SerialRelayBox("relays", sim.port_path, SETTINGS)
    try:
        assert after.tripped_at_open
        assert after.watchdog_state().watchdog is WatchdogMode.OFF
        after.apply([2])
        assert sim.closed() == {2}
    finally:
        after.close()


# ---- faults -----------------------------------------------------------------------------------


def test_bad_checksum_once_is_retried(sim: SimRelayBox, box: SerialRelayBox) -> None:
    sim.inject_fault("bad_checksum")
    box.apply([1, 2])
    assert box.retries == 1
    assert sim.closed() == {1, 2}
    assert box.operation_counts()[1] == 1  # the retry did not count twice


def test_persistent_bad_checksum_is_a_protocol_error(sim: SimRelayBox, box: SerialRelayBox) -> None:
    sim.inject_fault("bad_checksum", None)
    with pytest.raises(InstrumentProtocolError) as caught:
        box.closed_relays()
    assert caught.value.command == "STATE"
    assert "checksum" in str(caught.value)
    assert box.retries == 0
    sim.clear_faults()
    assert box.closed_relays() == frozenset()


def test_missed_ack_once_is_retried(sim: SimRelayBox, box: SerialRelayBox) -> None:
    sim.inject_fault("no_ack")
    box.apply([5])
    assert box.retries == 1
    assert sim.closed() == {5}
    assert sim.operation_counts()[5] == 1  # executed twice, moved once
    assert box.operation_counts()[5] == 1


def test_persistent_missed_ack_is_a_timeout(sim: SimRelayBox, box: SerialRelayBox) -> None:
    sim.inject_fault("no_ack", None)
    started = time.monotonic()
    with pytest.raises(InstrumentTimeout) as caught:
        box.apply([6])
    assert time.monotonic() - started < 5.0  # two 200 ms waits; only a hang exceeds this
    assert caught.value.command == "SET 6"
    assert "200 ms" in str(caught.value)


def test_lost_pty_is_a_lost_connection(sim: SimRelayBox, box: SerialRelayBox) -> None:
    box.apply([1])
    sim.inject_fault("close_pty")
    with pytest.raises(InstrumentConnectionLost) as caught:
        box.apply([2])
    assert caught.value.resource == sim.port_path
    assert caught.value.command == "SET 2"
    box.close()
    box.close()  # close never raises


def test_lost_pty_stops_the_heartbeat(sim: SimRelayBox, box: SerialRelayBox) -> None:
    box.start_watchdog(0.06)
    sim.inject_fault("close_pty")
    assert wait_for(lambda: isinstance(box.heartbeat_error, InstrumentConnectionLost))


# ---- a scripted peer for replies the simulator never sends ---------------------------------


class ScriptedPeer:
    """A real pty whose far end answers WHO and STATE properly and everything else via ``reply``."""

    def __init__(self, reply: Callable[[int], bytes]) -> None:
        self.master, self.slave = os.openpty()
        tty.setraw(self.slave)
        self.path = os.ttyname(self.slave)
        self._reply = reply
        self.verbs: list[str] = []
        """Every verb received, in order."""
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._run, daemon=True)
        self._thread.start()

    def _run(self) -> None:
        import select

        buffer = b""
        while not self._stop.is_set():
            ready, _, _ = select.select([self.master], [], [], 0.02)
            if not ready:
                continue
            buffer += os.read(self.master, 4096)
            while b"\n" in buffer:
                line, _, buffer = buffer.partition(b"\n")
                command = decode_command(line + b"\n")
                self.verbs.append(command.verb)
                if command.verb == "WHO":
                    payload = format_info(BoxInfo(4, 2, "a,b,c,d"))
                    os.write(self.master, encode_reply(Reply(command.seq, True, payload)))
                elif command.verb == "STATE":
                    payload = format_state(BoxState(frozenset(), WatchdogMode.OFF, 0))
                    os.write(self.master, encode_reply(Reply(command.seq, True, payload)))
                else:
                    os.write(self.master, self._reply(command.seq))

    def close(self) -> None:
        self._stop.set()
        self._thread.join()
        os.close(self.master)
        os.close(self.slave)


@pytest.mark.parametrize(
    ("answer", "message"),
    [
        (lambda seq: encode_reply(Reply((seq + 7) % 65536, True, "off")), "sequence number"),
        (lambda seq: b"garbage\n", "bad reply"),
        (lambda seq: b"no terminator", "not terminated"),
    ],
)
def test_wrong_replies_are_protocol_errors(answer: Callable[[int], bytes], message: str) -> None:
    peer = ScriptedPeer(answer)
    try:
        box = SerialRelayBox("relays", peer.path, SETTINGS)
        try:
            with pytest.raises(InstrumentProtocolError, match=message):
                box.stop_watchdog()
            assert box.retries == 0
        finally:
            box.close()
    finally:
        peer.close()


def test_a_change_is_verified_from_its_own_reply_without_a_state_query() -> None:
    # The SET reply is the state the box read once its contacts moved
    # (docs/relay-box-protocol.md): one exchange per change, and a reply that shows another
    # state than the one asked for is an error naming both.
    def answer(seq: int) -> bytes:
        return encode_reply(
            Reply(seq, True, format_state(BoxState(frozenset({2}), WatchdogMode.OFF, 0)))
        )

    peer = ScriptedPeer(answer)
    try:
        box = SerialRelayBox("relays", peer.path, SETTINGS)
        try:
            before = len(peer.verbs)
            box.apply([2])
            assert peer.verbs[before:] == ["SET"]
            with pytest.raises(InstrumentReportedError, match=r"shows closed 2, expected 1"):
                box.apply([1])
            assert peer.verbs[-1] == "SET"
        finally:
            box.close()
    finally:
        peer.close()


# ---- other work while the contacts move --------------------------------------------------------


@pytest.fixture
def slow_sim() -> Iterator[SimRelayBox]:
    """A box in real timing whose contacts take 50 ms to close (figures invented for the test)."""
    box = SimRelayBox(
        relay_count=8, max_closed=3, clock=BenchClock(Timing.REAL), operate_s=0.05, release_s=0.02
    )
    box.start()
    yield box
    box.stop()


def test_work_given_to_a_change_runs_while_the_contacts_move(slow_sim: SimRelayBox) -> None:
    # The box answers SET once its contacts have moved (docs/relay-box-protocol.md), so work
    # done between sending the command and reading the answer overlaps the operate time.
    box = SerialRelayBox("relays", slow_sim.port_path, SETTINGS)
    try:
        ran: list[tuple[float, frozenset[int]]] = []
        box.apply_overlapping([4], lambda: ran.append((time.monotonic(), slow_sim.closed())))
        closed_at = slow_sim.events()[-1]
        assert closed_at.action == "close" and closed_at.relay == 4
        assert len(ran) == 1
        when, seen = ran[0]
        assert seen == frozenset()  # relay 4 was still moving when the work ran
        assert when < closed_at.t
        assert box.closed_relays() == {4}
    finally:
        box.close()


def test_an_error_of_the_work_comes_after_the_change_is_verified(
    sim: SimRelayBox, box: SerialRelayBox
) -> None:
    def fails() -> None:
        raise InstrumentTimeout("meter did not answer", instrument="dmm")

    with pytest.raises(InstrumentTimeout, match="meter did not answer"):
        box.apply_overlapping([2, 3], fails)
    assert sim.closed() == {2, 3}  # the change itself went through and was read back
    assert box.closed_relays() == {2, 3}  # the link is still in step
    box.apply([1])
    assert sim.closed() == {1}


def test_a_failed_change_is_raised_and_not_the_work(sim: SimRelayBox, box: SerialRelayBox) -> None:
    def fails() -> None:
        raise RuntimeError("should stay behind the relay box's error")

    with pytest.raises(InstrumentReportedError, match="relay box refused"):
        box.apply_overlapping([1, 2, 3, 4], fails)  # over the box's budget of 3


def test_the_work_runs_once_when_the_change_is_retried(
    sim: SimRelayBox, box: SerialRelayBox
) -> None:
    sim.inject_fault("no_ack")  # the first answer is lost; the driver sends SET again
    calls: list[int] = []
    box.apply_overlapping([5], lambda: calls.append(1))
    assert box.retries == 1
    assert calls == [1]
    assert sim.closed() == {5}


def test_after_ctrl_c_mid_reply_the_late_reply_is_skipped_quietly() -> None:
    # Ctrl-C while the box's contacts move (0.3 s here): the box still answers that SET, and
    # the next command must skip the answer, not take it as a garbled reply and retry.
    sim = SimRelayBox(
        relay_count=8, max_closed=3, clock=BenchClock(Timing.REAL), operate_s=0.3, release_s=0.3
    )
    sim.start()
    driver = SerialRelayBox("relays", sim.port_path, {"timeout_ms": 2000})
    try:
        timer = threading.Timer(0.1, lambda: os.kill(os.getpid(), signal.SIGINT))
        timer.start()
        with pytest.raises(KeyboardInterrupt):
            driver.apply([2])
        timer.join()
        # asked at once, while the contacts still move: the SET's answer comes first
        assert driver.closed_relays() == frozenset({2})
        assert driver.retries == 0  # skipped as a late reply, not retried as a bad one
    finally:
        driver.close()
        sim.stop()


# ---- a change sent now, its answer read later ---------------------------------------------------


def test_a_change_sent_returns_while_the_contacts_move(slow_sim: SimRelayBox) -> None:
    # Operate 50 ms (invented for the test): send_change comes back long before the contacts
    # have closed; finish_change waits for the box's answer and verifies it.
    box = SerialRelayBox("relays", slow_sim.port_path, SETTINGS)
    try:
        box.send_change([3])
        assert slow_sim.closed() == frozenset()  # still moving
        box.finish_change()
        assert slow_sim.closed() == {3}
        assert box.operation_counts()[3] == 1
        box.finish_change()  # nothing pending: nothing to do
    finally:
        box.close()


def test_the_heartbeat_answers_a_change_left_in_flight(slow_sim: SimRelayBox) -> None:
    # Watchdog 90 ms, a beat every 30 ms.  The caller sends a change and then leaves the box
    # alone for 300 ms: the box trips unless the heartbeat can still beat, which it can only by
    # reading the change's answer first (one command in flight at a time).
    box = SerialRelayBox("relays", slow_sim.port_path, SETTINGS)
    try:
        box.start_watchdog(0.09)
        box.send_change([2])
        time.sleep(0.3)
        assert not slow_sim.watchdog_tripped
        assert box.heartbeat_error is None
        box.finish_change()  # answered by the heartbeat, verified here without a word sent
        assert slow_sim.closed() == {2}
        box.stop_watchdog()
    finally:
        box.close()


def test_a_refused_change_is_raised_by_finish_change(sim: SimRelayBox, box: SerialRelayBox) -> None:
    box.send_change([1, 2, 3, 4])  # over the box's coil budget of 3: refused, nothing moves
    with pytest.raises(InstrumentReportedError, match="relay box refused"):
        box.finish_change()
    assert sim.closed() == frozenset()
    box.apply([1])  # the link is in step
    assert sim.closed() == {1}


def test_opening_everything_supersedes_a_change_in_flight(
    sim: SimRelayBox, box: SerialRelayBox
) -> None:
    box.send_change([4, 5])
    box.open_all()  # reads the change's answer first, then opens
    assert sim.closed() == frozenset()
    assert box.operation_counts()[4] == 2 and box.operation_counts()[5] == 2
    box.finish_change()  # superseded: nothing left to report
    assert box.closed_relays() == frozenset()


def test_a_change_to_all_open_is_itself_the_proof_of_the_safe_state(
    sim: SimRelayBox, box: SerialRelayBox
) -> None:
    # The box answers a change with the state it reads after its contacts moved: when that
    # change opened everything and was verified, opening everything again proves nothing more.
    box.apply([6])
    handled = sim.lines_handled
    box.send_change([])
    box.open_all()
    assert sim.lines_handled == handled + 1  # the SET alone: its own answer proved it
    assert sim.closed() == frozenset()
    box.open_all()  # with no such change pending it is sent as always
    assert sim.lines_handled == handled + 2


def test_an_opening_cut_short_by_ctrl_c_is_not_taken_as_proof() -> None:
    # Ctrl-C while waiting for the answer to a change to all open: that change is unverified,
    # so the safe state that follows sends OPENALL and checks its answer instead of trusting it.
    sim = SimRelayBox(
        relay_count=8, max_closed=3, clock=BenchClock(Timing.REAL), operate_s=0.3, release_s=0.3
    )
    sim.start()
    driver = SerialRelayBox("relays", sim.port_path, {"timeout_ms": 2000})
    try:
        driver.apply([2])
        driver.send_change([])
        timer = threading.Timer(0.1, lambda: os.kill(os.getpid(), signal.SIGINT))
        timer.start()
        with pytest.raises(KeyboardInterrupt):
            driver.finish_change()
        timer.join()
        handled = sim.lines_handled
        driver.open_all()
        assert sim.lines_handled == handled + 1  # OPENALL went out
        assert sim.closed() == frozenset()
    finally:
        driver.close()
        sim.stop()


# ---- DTR and RTS on opening (assert_dtr_rts) ------------------------------------------------
# The relay box's ``assert_dtr_rts`` setting, on the simulated box's real pseudo-terminal.
#
# What a pty can show: the port opens and the box answers with the setting either way, pyserial
# was asked for DTR and RTS low (``Serial.dtr``/``.rts`` before ``open``, as pyserial's API has
# it), and a wrong value is refused at its key.  What it cannot show: a pty has no modem lines
# (pyserial's TIOCMBIC ioctl is refused there and ignored), so no test here proves the lines stay
# low on a real port; that needs a USB serial adapter and a scope or a board that resets on DTR.


@pytest.mark.parametrize("raised", [False, True])
def test_the_box_opens_and_works_with_the_lines_held_low_or_raised(
    sim: SimRelayBox, raised: bool
) -> None:
    box = SerialRelayBox("relays", sim.port_path, {"timeout_ms": 200, "assert_dtr_rts": raised})
    try:
        assert box.identity().model == "tb8"
        box.apply([2, 5])
        assert sim.closed() == {2, 5} and box.closed_relays() == {2, 5}
        port = box._port  # what rig asked pyserial for; a pty cannot show the lines themselves
        assert (port.dtr, port.rts) == (raised, raised)
    finally:
        box.close()


def test_the_lines_are_raised_when_the_station_says_nothing(sim: SimRelayBox) -> None:
    box = SerialRelayBox("relays", sim.port_path, {"timeout_ms": 200})
    try:
        assert (box._port.dtr, box._port.rts) == (True, True)  # pyserial's own default, kept
    finally:
        box.close()


@pytest.mark.parametrize("value", ["false", 0, 1, "no"])
def test_a_value_that_is_not_true_or_false_is_refused_at_its_key(value: object) -> None:
    with pytest.raises(ConfigError) as caught:
        SerialRelayBox("relays", "/dev/null", {"assert_dtr_rts": value})
    (problem,) = caught.value.problems
    assert problem.key == "assert_dtr_rts"
    assert f"expected true or false, found {value!r}" in str(caught.value)
