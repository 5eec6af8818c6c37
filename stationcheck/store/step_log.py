"""The StepLog protocol: what the station writes to and the review reads from.

Two implementations: :class:`~stationcheck.store.sqlite_log.SqliteStepLog` (the real one) and
:class:`~stationcheck.store.memory_log.MemoryStepLog` (a fake for tests of other parts). Both
derive their rows with the same fold (:mod:`stationcheck.store.projection`).
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Protocol, runtime_checkable

from stationcheck.core.events import Event
from stationcheck.core.progress import UnitProgress
from stationcheck.store.log_records import AlarmRow, Page, StepRow, StoredEvent, UnitQuery, UnitRow


@runtime_checkable
class StepLog(Protocol):
    def append(self, events: Iterable[Event], recorded_at_s: float) -> int:
        """Save a batch of events atomically; returns the last seq only once they are saved."""

    def events(
        self, serial: str | None = None, after_seq: int = 0, limit: int | None = None
    ) -> tuple[StoredEvent, ...]: ...

    def open_unit_events(self) -> tuple[Event, ...]: ...

    def open_unit(self) -> UnitProgress | None: ...

    def rebuild(self) -> int: ...

    def units(self, query: UnitQuery | None = None) -> Page[UnitRow]: ...

    def unit(self, serial: str) -> UnitRow | None: ...

    def steps(self, serial: str) -> tuple[StepRow, ...]: ...

    def alarms(self, serial: str) -> tuple[AlarmRow, ...]: ...

    def close(self) -> None: ...


def checked_batch(events: Iterable[Event], recorded_at_s: float) -> list[Event]:
    """The batch as a list, once it is known to hold only events, with a finite wall clock."""
    if not math.isfinite(recorded_at_s):
        raise ValueError(f"recorded_at_s must be a finite number, got {recorded_at_s!r}")
    batch = list(events)
    for event in batch:
        if not isinstance(event, Event):
            raise TypeError(f"step log takes Event records, got {type(event).__name__}")
    return batch
