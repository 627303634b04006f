"""The host set up for timing, as a test station's controller PC would be: not part of rig.

On a real bench the meter, the supply and the relay box are separate hardware, and the
controller's PC is set up not to doze between readings.  On the virtual bench everything shares
one machine, so two settings make the host behave more like that, for the benchmark only:

- CPU affinity: the controller's process on a core of its own, the virtual bench on the others,
  so the simulated instruments never take the controller's core (``os.sched_setaffinity``);
- CPU idle states: ``/dev/cpu_dma_latency`` held open with 0 (the kernel's PM QoS interface,
  which needs root), so an idle core is not put to sleep so deeply that waking it on a reply
  takes longer than the reply's own journey.  On this VM a halted virtual CPU took 0.3 to 0.5
  ms to wake for a reply that crossed the loopback in a few tens of microseconds (measured).

Both are common practice on timing-critical test stations (no published source).  Each is
applied only where the host allows it, and the benchmark prints what was applied; ``--as-is``
leaves the host alone, to show the difference.
"""

from __future__ import annotations

import os
import struct
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import BinaryIO

QOS_DEVICE = "/dev/cpu_dma_latency"


@dataclass
class HostTuning:
    """What was applied: the controller's core (None: not pinned), the bench's cores, and
    whether the idle states are held shallow."""

    controller_cpu: int | None = None
    bench_cpus: set[int] = field(default_factory=set)
    shallow_idle: bool = False
    notes: list[str] = field(default_factory=list)

    def describe(self) -> str:
        if self.controller_cpu is None and not self.shallow_idle:
            return "host as it is (" + "; ".join(self.notes or ["no tuning asked"]) + ")"
        parts = []
        if self.controller_cpu is not None:
            bench = ",".join(str(c) for c in sorted(self.bench_cpus))
            parts.append(f"controller on CPU {self.controller_cpu}, bench on CPU {bench}")
        if self.shallow_idle:
            parts.append("CPUs kept out of deep idle (PM QoS 0 us)")
        return "host tuned: " + "; ".join(parts + self.notes)

    def as_json(self) -> dict[str, object]:
        return {
            "controller_pinned": self.controller_cpu is not None,
            "shallow_idle": self.shallow_idle,
        }


@contextmanager
def tuned_host(enabled: bool, *, pin: bool = True) -> Iterator[HostTuning]:
    """Apply what the host allows for the duration (this process is the bench's side)."""
    tuning = HostTuning()
    if not enabled:
        yield tuning
        return
    before = os.sched_getaffinity(0)
    qos: BinaryIO | None = None
    try:
        cpus = sorted(before)
        if pin and len(cpus) >= 2:
            tuning.controller_cpu, tuning.bench_cpus = cpus[0], set(cpus[1:])
            os.sched_setaffinity(0, tuning.bench_cpus)
        elif pin:
            tuning.notes.append("one CPU only: not pinned")
        try:
            qos = open(QOS_DEVICE, "wb", buffering=0)  # noqa: SIM115 (held for the duration)
            qos.write(struct.pack("i", 0))
            tuning.shallow_idle = True
        except OSError as exc:
            tuning.notes.append(f"idle states as they are ({QOS_DEVICE}: {exc.strerror})")
        yield tuning
    finally:
        if qos is not None:
            qos.close()  # the kernel drops the request with the file
        os.sched_setaffinity(0, before)


def pin_this_process(cpu: int | None) -> None:
    """The controller's side: run on ``cpu`` (None: anywhere)."""
    if cpu is not None:
        os.sched_setaffinity(0, {cpu})
