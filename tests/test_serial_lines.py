"""The chunked line reader on a real pseudo-terminal through pyserial: lines split where their
terminator is, whatever chunks they arrive in; a line cut at its limit; an unfinished line
returned when the port's timeout passes."""

from __future__ import annotations

import os
import time
import tty
from collections.abc import Iterator

import pytest
import serial

from drivers.serial_lines import LineReader


@pytest.fixture
def pty() -> Iterator[tuple[int, serial.Serial]]:
    master, slave = os.openpty()
    tty.setraw(slave)
    port = serial.Serial(os.ttyname(slave), 115200, timeout=0.2)
    yield master, port
    port.close()
    os.close(master)
    os.close(slave)


def test_two_replies_in_one_chunk_are_two_lines(pty: tuple[int, serial.Serial]) -> None:
    master, port = pty
    reader = LineReader(port)
    os.write(master, b"0001 OK first*00\n0002 OK second*00\n")
    assert reader.read_line(1024) == b"0001 OK first*00\n"
    assert reader.read_line(1024) == b"0002 OK second*00\n"


def test_a_line_in_pieces_is_one_line(pty: tuple[int, serial.Serial]) -> None:
    master, port = pty
    reader = LineReader(port)
    os.write(master, b"0003 OK ha")
    os.write(master, b"lf*00\n")
    assert reader.read_line(1024) == b"0003 OK half*00\n"


def test_a_line_longer_than_the_limit_is_cut(pty: tuple[int, serial.Serial]) -> None:
    master, port = pty
    reader = LineReader(port)
    os.write(master, b"x" * 40 + b"\n")
    assert reader.read_line(16) == b"x" * 16  # no terminator: the caller reports it


def test_timeout_returns_what_came_and_discard_forgets_the_rest(
    pty: tuple[int, serial.Serial],
) -> None:
    master, port = pty
    reader = LineReader(port)
    assert reader.read_line(1024) == b""  # nothing within 0.2 s
    os.write(master, b"no terminator")
    assert reader.read_line(1024) == b"no terminator"
    os.write(master, b"stale\nstale too\n")
    assert reader.read_line(1024) == b"stale\n"  # "stale too" is now held by the reader
    reader.discard_input()
    os.write(master, b"fresh\n")
    assert reader.read_line(1024) == b"fresh\n"


def test_discard_forgets_what_waits_in_the_port_too(pty: tuple[int, serial.Serial]) -> None:
    master, port = pty
    reader = LineReader(port)
    os.write(master, b"stale reply\n")
    deadline = time.monotonic() + 5.0
    while not port.in_waiting and time.monotonic() < deadline:  # the terminal delivers it
        time.sleep(0.001)
    assert port.in_waiting
    reader.discard_input()
    assert port.in_waiting == 0
    os.write(master, b"fresh\n")
    assert reader.read_line(1024) == b"fresh\n"
