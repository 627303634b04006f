"""Commit the results store's writes on a worker thread while the engine works the instruments.

A commit with ``synchronous=FULL`` waits for the disk (0.5 ms on a quiet machine, several ms on a
busy one), and a step writes its readings and its result one commit each.  Neither the next relay
change nor the next reading depends on those rows, so the engine lets them commit meanwhile.

The promise that nothing is reported as stored before it is committed is kept by holding back
the engine's events: an event waits until every write queued before it has committed, and events
are delivered in the order they were emitted.  Every other store call (reads, the run's end)
waits for all queued writes first, so the SQLite connection is never used by two threads at once;
the run's start goes on the worker too (``meanwhile``), and the engine waits for its answer.
"""

from __future__ import annotations

import queue
import threading
from collections.abc import Callable
from typing import Any

from rig.events import Event

QUEUED = frozenset({"add_reading", "add_step", "mark_settled"})
"""Store writes whose result the engine does not wait for."""


def _STOP() -> None:
    """Put on the queue to end the worker."""


class RowTicket:
    """The row a queued reading will get: filled in by the worker when the insert commits, so a
    later queued write (which runs after it, in order) can name that row."""

    row: int = 0


class Pending:
    """The answer of a store call made on the worker (``CommitAhead.meanwhile``)."""

    def __init__(self, owner: CommitAhead) -> None:
        self._owner = owner
        self.value: Any = None

    def result(self) -> Any:
        """Wait until the call and every write before it have committed; its answer, or the
        error of the first write that failed."""
        self._owner.flush()
        return self.value


class CommitAhead:
    """Wraps a results store; queued writes commit in order on one worker thread."""

    def __init__(self, store: Any, deliver: Callable[[Event], None]) -> None:
        self._store = store
        self._deliver = deliver
        self._queue: queue.Queue[Callable[[], object]] = queue.Queue()
        self._done = threading.Condition()
        self._queued = 0
        self._committed = 0
        self._held: list[tuple[int, Event]] = []
        """Events, each with the number of writes queued before it."""
        self._error: BaseException | None = None
        self._last_reading_row = 0
        self._worker: threading.Thread | None = None

    def __getattr__(self, name: str) -> Any:
        attr = getattr(self._store, name)
        if not callable(attr):
            return attr
        if name in QUEUED:
            return lambda *args, **kwargs: self._put(lambda: attr(*args, **kwargs), name)

        def in_turn(*args: Any, **kwargs: Any) -> Any:
            self.flush()
            return attr(*args, **kwargs)

        return in_turn

    # --- events -------------------------------------------------------------------------------

    def emit(self, event: Event) -> None:
        """Deliver ``event`` once every write queued before it has committed, in order."""
        with self._done:
            self._held.append((self._queued, event))
        self._deliver_committed()

    def flush(self) -> None:
        """Wait until every queued write has committed and deliver every event held back.

        A write that failed is raised here, in the engine's thread, once; the events after it
        are dropped, since what they report may not have been stored."""
        with self._done:
            self._done.wait_for(lambda: self._committed >= self._queued)
            error, self._error = self._error, None
            if error is not None:
                self._held.clear()
                raise error
        self._deliver_committed()

    def close(self) -> None:
        """Flush, then stop the worker thread (a later write starts a new one)."""
        try:
            self.flush()
        finally:
            worker, self._worker = self._worker, None
            if worker is not None:
                self._queue.put(_STOP)
                worker.join()

    def meanwhile(self, name: str, *args: Any, **kwargs: Any) -> Pending:
        """Make the store call ``name`` on the worker, in order with the writes, while the caller
        goes on (the run's start commits while the bench is made safe); ``result()`` waits."""
        pending = Pending(self)
        call = getattr(self._store, name)

        def write() -> object:
            pending.value = call(*args, **kwargs)
            return pending.value

        self._put(write, name)
        return pending

    def add_reading_for_later(self, *args: Any, **kwargs: Any) -> RowTicket:
        """Queue a reading like ``add_reading`` and return a ticket for its row, for a later
        write about that row (``mark_unsettled_later``)."""
        ticket = RowTicket()

        def write() -> object:
            ticket.row = int(self._store.add_reading(*args, **kwargs))
            return ticket.row

        self._put(write, "add_reading")
        return ticket

    def mark_unsettled_later(self, tickets: list[RowTicket]) -> None:
        """Take the settled flag back from the readings of ``tickets``."""
        self._put(lambda: self._store.mark_unsettled([t.row for t in tickets]), "mark_unsettled")

    def mark_last_settled(self) -> None:
        """Flag the most recent reading queued as the one its step's value was taken from."""
        self._put(lambda: self._store.mark_settled(self._last_reading_row), "mark_settled")

    def _deliver_committed(self) -> None:
        while True:
            with self._done:
                if not self._held or self._held[0][0] > self._committed or self._error:
                    return
                _, event = self._held.pop(0)
            self._deliver(event)

    # --- the worker ---------------------------------------------------------------------------

    def _put(self, write: Callable[[], object], name: str) -> None:
        if self._worker is None:
            self._worker = threading.Thread(target=self._work, name="store-commits", daemon=True)
            self._worker.start()
        with self._done:
            self._queued += 1
        if name == "add_reading":
            self._queue.put(lambda: self._remember_row(write()))
        else:
            self._queue.put(write)

    def _remember_row(self, row: object) -> None:
        if isinstance(row, int):
            self._last_reading_row = row

    def _work(self) -> None:
        while True:
            write = self._queue.get()
            if write is _STOP:
                return
            try:
                if self._error is None:  # after a failure, nothing later is written
                    write()
            except BaseException as exc:  # handed to the engine's thread by flush()
                self._error = exc
            finally:
                with self._done:
                    self._committed += 1
                    self._done.notify_all()
