"""An in-memory step log for tests of other parts: same fold, same queries, no file."""

from __future__ import annotations

from collections.abc import Callable, Iterable
from dataclasses import replace

from stationcheck.core.events import RESULT_NOK, Event
from stationcheck.core.progress import UnitProgress, rebuild_unit
from stationcheck.store.log_records import (
    UNIT_OPEN,
    AlarmRow,
    Page,
    StepRow,
    StoredEvent,
    UnitQuery,
    UnitRow,
)
from stationcheck.store.projection import project
from stationcheck.store.queries import decode_after, encode_after
from stationcheck.store.step_log import checked_batch

_RESULT_TESTS: dict[str, Callable[[UnitRow], bool]] = {
    "OK": lambda u: u.status == "OK",
    "NOK": lambda u: u.status == "NotOK",
    "aborted": lambda u: u.status == "NotDecidable",
    "open": lambda u: u.status == UNIT_OPEN,
    "reworked": lambda u: u.reworked,
    "first_time_through": lambda u: u.first_time_through,
}


class MemoryTables:
    def __init__(self) -> None:
        self.units: dict[str, UnitRow] = {}
        self.steps: dict[int, StepRow] = {}
        self.alarms: dict[int, AlarmRow] = {}
        self.tags: dict[tuple[str, str], tuple[float, float]] = {}

    def get_unit(self, serial: str) -> UnitRow | None:
        return self.units.get(serial)

    def put_unit(self, unit: UnitRow) -> None:
        self.units[unit.serial] = unit

    def add_step(self, step: StepRow) -> None:
        self.steps[step.seq] = step

    def set_position_result(
        self, serial: str, pass_no: int, step: str, position: str, result: str
    ) -> None:
        for seq in sorted(self.steps, reverse=True):
            row = self.steps[seq]
            if (row.serial, row.pass_no, row.step, row.position) == (
                serial,
                pass_no,
                step,
                position,
            ):
                self.steps[seq] = replace(row, position_result=result)
                return

    def add_alarm(self, alarm: AlarmRow) -> None:
        self.alarms[alarm.seq] = alarm

    def clear_alarm(self, code: str, subject: str, cleared_t_s: float) -> None:
        for seq in sorted(self.alarms, reverse=True):
            row = self.alarms[seq]
            if row.code == code and row.subject == subject and row.cleared_t_s is None:
                self.alarms[seq] = replace(row, cleared_t_s=cleared_t_s)
                return

    def add_tag(self, unit: UnitRow, tag: str) -> None:
        self.tags.setdefault((tag, unit.serial), (unit.started_t_s, unit.started_at_s))


class MemoryStepLog:
    """Keeps everything in lists and dicts; ``append`` checks the whole batch before keeping any
    of it."""

    def __init__(self) -> None:
        self._events: list[StoredEvent] = []
        self._tables = MemoryTables()

    def append(self, events: Iterable[Event], recorded_at_s: float) -> int:
        batch = checked_batch(events, recorded_at_s)
        first = len(self._events) + 1
        stored = [StoredEvent(first + i, recorded_at_s, e) for i, e in enumerate(batch)]
        for item in stored:
            project(item, self._tables)
        self._events.extend(stored)
        return len(self._events)

    def events(
        self, serial: str | None = None, after_seq: int = 0, limit: int | None = None
    ) -> tuple[StoredEvent, ...]:
        found = [s for s in self._events[after_seq:] if serial is None or s.event.serial == serial]
        return tuple(found if limit is None else found[:limit])

    def open_unit_events(self) -> tuple[Event, ...]:
        open_units = [u for u in self._tables.units.values() if u.open_seq is not None]
        if not open_units:
            return ()
        unit = max(open_units, key=lambda u: u.open_seq or 0)
        assert unit.open_seq is not None
        return tuple(s.event for s in self.events(unit.serial, after_seq=unit.open_seq - 1))

    def open_unit(self) -> UnitProgress | None:
        return rebuild_unit(self.open_unit_events())

    def rebuild(self) -> int:
        self._tables = MemoryTables()
        for stored in self._events:
            project(stored, self._tables)
        return len(self._events)

    def _matches(self, unit: UnitRow, query: UnitQuery) -> bool:
        key = unit.started_t_s if query.time_basis == "t_s" else unit.started_at_s
        tests = (
            query.serial is None or unit.serial == query.serial,
            not query.serial_prefix or unit.serial.startswith(query.serial_prefix),
            query.from_s is None or key >= query.from_s,
            query.to_s is None or key < query.to_s,
            query.result is None or _RESULT_TESTS[query.result](unit),
            query.failed_position is None
            or any(
                s.serial == unit.serial
                and s.position == query.failed_position
                and s.position_result == RESULT_NOK
                for s in self._tables.steps.values()
            ),
            query.alarm_code is None
            or any(
                a.serial == unit.serial and a.code == query.alarm_code
                for a in self._tables.alarms.values()
            ),
        )
        return all(tests)

    def units(self, query: UnitQuery | None = None) -> Page[UnitRow]:
        query = query or UnitQuery()
        found = [u for u in self._tables.units.values() if self._matches(u, query)]

        def sort_key(u: UnitRow) -> list[object]:
            if query.order == "serial":
                return [u.serial]
            return [u.started_t_s if query.time_basis == "t_s" else u.started_at_s, u.serial]

        descending = query.order == "newest"
        found.sort(key=sort_key, reverse=descending)
        total = len(found)
        if query.after is not None:
            after = decode_after(query.after, query)
            found = [
                u for u in found if (sort_key(u) < after if descending else sort_key(u) > after)
            ]
        rows = found[query.offset : query.offset + query.limit + 1]
        page = tuple(rows[: query.limit])
        more = len(rows) > query.limit
        return Page(
            page,
            total if query.count_total else None,
            encode_after(page[-1], query) if more else None,
        )

    def unit(self, serial: str) -> UnitRow | None:
        return self._tables.units.get(serial)

    def steps(self, serial: str) -> tuple[StepRow, ...]:
        return tuple(s for _, s in sorted(self._tables.steps.items()) if s.serial == serial)

    def alarms(self, serial: str) -> tuple[AlarmRow, ...]:
        return tuple(a for _, a in sorted(self._tables.alarms.items()) if a.serial == serial)

    def close(self) -> None:
        """Nothing to release."""
