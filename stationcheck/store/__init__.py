"""The step log: every event of every unit, kept durably, with units, steps and alarms derived
from the events for quick review queries."""

from __future__ import annotations

from stationcheck.store.log_records import (
    AlarmRow,
    Page,
    StepRow,
    StoredEvent,
    UnitQuery,
    UnitRow,
)
from stationcheck.store.memory_log import MemoryStepLog
from stationcheck.store.sqlite_log import SqliteStepLog
from stationcheck.store.step_log import StepLog

__all__ = [
    "AlarmRow",
    "MemoryStepLog",
    "Page",
    "SqliteStepLog",
    "StepLog",
    "StepRow",
    "StoredEvent",
    "UnitQuery",
    "UnitRow",
]
