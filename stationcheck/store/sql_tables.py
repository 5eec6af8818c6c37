"""Derived rows <-> SQLite: row mapping, and the buffered table writer the projection folds into.

The writer keeps the rows an append (or a rebuild chunk) touches in memory and writes them with
``executemany`` at :meth:`BufferedSqlTables.flush`, inside the caller's transaction; one code
path serves the station's single-event commits and the bulk rebuild of millions of events.
"""

from __future__ import annotations

import json
import sqlite3
from dataclasses import fields, replace
from typing import Any

from stationcheck.store.log_records import AlarmRow, StepRow, UnitRow

UNIT_COLUMNS = tuple(f.name for f in fields(UnitRow))
STEP_COLUMNS = tuple(f.name for f in fields(StepRow))
ALARM_COLUMNS = tuple(f.name for f in fields(AlarmRow))
TAG_COLUMNS = ("tag", "serial", "started_t_s", "started_at_s")
_UNIT_TUPLES = ("failed_positions", "unfinished_positions")
_UNIT_BOOLS = ("released", "reworked", "first_time_through")


def dump_json(data: Any) -> str:
    return json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=False)


def _placeholders(columns: tuple[str, ...]) -> str:
    return ", ".join("?" for _ in columns)


def insert_sql(table: str, columns: tuple[str, ...], verb: str = "INSERT") -> str:
    return f"{verb} INTO {table} ({', '.join(columns)}) VALUES ({_placeholders(columns)})"


def unit_to_sql(unit: UnitRow) -> tuple[Any, ...]:
    values = []
    for name in UNIT_COLUMNS:
        value = getattr(unit, name)
        values.append(dump_json(list(value)) if name in _UNIT_TUPLES else value)
    return tuple(values)


def unit_from_sql(row: sqlite3.Row | tuple[Any, ...]) -> UnitRow:
    raw = dict(zip(UNIT_COLUMNS, row, strict=True))
    for name in _UNIT_TUPLES:
        raw[name] = tuple(json.loads(raw[name]))
    for name in _UNIT_BOOLS:
        raw[name] = bool(raw[name])
    return UnitRow(**raw)


def _record_to_sql(record: StepRow | AlarmRow, columns: tuple[str, ...]) -> tuple[Any, ...]:
    return tuple(
        dump_json(dict(record.detail)) if name == "detail" else getattr(record, name)
        for name in columns
    )


def _record_from_sql(
    row: sqlite3.Row | tuple[Any, ...], columns: tuple[str, ...]
) -> dict[str, Any]:
    raw = dict(zip(columns, row, strict=True))
    raw["detail"] = json.loads(raw["detail"])
    return raw


def step_to_sql(step: StepRow) -> tuple[Any, ...]:
    return _record_to_sql(step, STEP_COLUMNS)


def step_from_sql(row: sqlite3.Row | tuple[Any, ...]) -> StepRow:
    raw = _record_from_sql(row, STEP_COLUMNS)
    if raw["within_limits"] is not None:
        raw["within_limits"] = bool(raw["within_limits"])
    return StepRow(**raw)


def alarm_to_sql(alarm: AlarmRow) -> tuple[Any, ...]:
    return _record_to_sql(alarm, ALARM_COLUMNS)


def alarm_from_sql(row: sqlite3.Row | tuple[Any, ...]) -> AlarmRow:
    return AlarmRow(**_record_from_sql(row, ALARM_COLUMNS))


class BufferedSqlTables:
    """The projection's tables over one SQLite connection, written at :meth:`flush`."""

    def __init__(self, conn: sqlite3.Connection) -> None:
        self._conn = conn
        self._units: dict[str, UnitRow] = {}
        self._dirty: set[str] = set()
        self._steps: dict[int, StepRow] = {}
        self._last_attempt: dict[tuple[str, int, str, str], int] = {}
        self._alarms: dict[int, AlarmRow] = {}
        self._uncleared: dict[tuple[str, str], list[int]] = {}
        self._tags: dict[tuple[str, str], tuple[float, float]] = {}

    @property
    def pending(self) -> int:
        return len(self._steps) + len(self._alarms) + len(self._dirty)

    def get_unit(self, serial: str) -> UnitRow | None:
        unit = self._units.get(serial)
        if unit is None:
            row = self._stored_unit(serial)
            if row is not None:
                unit = self._units[serial] = unit_from_sql(row)
        return unit

    def put_unit(self, unit: UnitRow) -> None:
        self._units[unit.serial] = unit
        self._dirty.add(unit.serial)

    def add_step(self, step: StepRow) -> None:
        self._steps[step.seq] = step
        if step.position is not None:
            self._last_attempt[(step.serial, step.pass_no, step.step, step.position)] = step.seq

    def set_position_result(
        self, serial: str, pass_no: int, step: str, position: str, result: str
    ) -> None:
        seq = self._last_attempt.get((serial, pass_no, step, position))
        if seq is not None:
            self._steps[seq] = replace(self._steps[seq], position_result=result)
            return
        self._store_position_result(serial, pass_no, step, position, result)

    def add_alarm(self, alarm: AlarmRow) -> None:
        self._alarms[alarm.seq] = alarm
        self._uncleared.setdefault((alarm.code, alarm.subject), []).append(alarm.seq)

    def clear_alarm(self, code: str, subject: str, cleared_t_s: float) -> None:
        stack = self._uncleared.get((code, subject))
        if stack:
            seq = stack.pop()
            self._alarms[seq] = replace(self._alarms[seq], cleared_t_s=cleared_t_s)
            return
        self._store_cleared(code, subject, cleared_t_s)

    # -- the rows not in the buffer, in the stored tables (a dialect overrides these three)
    def _stored_unit(self, serial: str) -> Any:
        return self._conn.execute(
            f"SELECT {', '.join(UNIT_COLUMNS)} FROM units WHERE serial = ?", (serial,)
        ).fetchone()

    def _store_position_result(
        self, serial: str, pass_no: int, step: str, position: str, result: str
    ) -> None:
        self._conn.execute(
            "UPDATE steps SET position_result = ? WHERE seq = (SELECT seq FROM steps WHERE "
            "serial = ? AND pass_no = ? AND step = ? AND position = ? ORDER BY seq DESC LIMIT 1)",
            (result, serial, pass_no, step, position),
        )

    def _store_cleared(self, code: str, subject: str, cleared_t_s: float) -> None:
        self._conn.execute(
            "UPDATE alarms SET cleared_t_s = ? WHERE seq = (SELECT max(seq) FROM alarms WHERE "
            "code = ? AND subject = ? AND cleared_t_s IS NULL)",
            (cleared_t_s, code, subject),
        )

    def add_tag(self, unit: UnitRow, tag: str) -> None:
        self._tags[(tag, unit.serial)] = (unit.started_t_s, unit.started_at_s)

    def flush(self) -> None:
        """Write what is buffered and forget it (the next fold reads back from the tables)."""
        conn = self._conn
        if self._dirty:
            conn.executemany(
                insert_sql("units", UNIT_COLUMNS, "INSERT OR REPLACE"),
                [unit_to_sql(self._units[serial]) for serial in self._dirty],
            )
        if self._steps:
            conn.executemany(
                insert_sql("steps", STEP_COLUMNS), [step_to_sql(s) for s in self._steps.values()]
            )
        if self._alarms:
            conn.executemany(
                insert_sql("alarms", ALARM_COLUMNS),
                [alarm_to_sql(a) for a in self._alarms.values()],
            )
        if self._tags:
            conn.executemany(
                insert_sql("unit_tags", TAG_COLUMNS, "INSERT OR IGNORE"),
                [(tag, serial, *times) for (tag, serial), times in self._tags.items()],
            )
        self.discard()

    def discard(self) -> None:
        for buffer in (
            self._units,
            self._steps,
            self._last_attempt,
            self._alarms,
            self._uncleared,
            self._tags,
        ):
            buffer.clear()
        self._dirty.clear()
