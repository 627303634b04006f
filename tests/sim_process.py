"""A virtual bench served by `rig sim` or `rig harness sim` as a real subprocess, and its
control channel spoken to over real TCP."""

from __future__ import annotations

import json
import os
import socket
import subprocess
import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager


def control(port: int, command: str) -> dict[str, object]:
    """One command on the control channel at ``port``, and its JSON reply."""
    with socket.create_connection(("127.0.0.1", port), timeout=5) as sock:
        stream = sock.makefile("rw", encoding="utf-8", newline="\n")
        stream.write(command + "\n")
        stream.flush()
        return dict(json.loads(stream.readline()))


@contextmanager
def served(args: list[str]) -> Iterator[tuple[subprocess.Popen[str], list[str]]]:
    """``rig ARGS`` started and read up to its "Ctrl-C" line (within 20 s): the process and the
    lines it printed.  Killed on the way out if the test has not stopped it."""
    proc = subprocess.Popen(
        [sys.executable, "-m", "rig.cli", *args],
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        env={**os.environ, "PYTHONUNBUFFERED": "1"},
    )
    try:
        lines = []
        deadline = time.monotonic() + 20
        while time.monotonic() < deadline and proc.stdout is not None:
            line = proc.stdout.readline()
            lines.append(line)
            if "Ctrl-C" in line or not line:
                break
        yield proc, lines
    finally:
        if proc.poll() is None:
            proc.kill()
            proc.wait()


def control_port(lines: list[str]) -> int:
    """The control channel's port, from what the bench printed."""
    return int(next(li for li in lines if li.strip().startswith("control")).rsplit(":", 1)[1])
