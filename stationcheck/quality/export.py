"""Units, a unit's steps and alarms as plain dicts, CSV and JSON. Lists are written in chunks,
one keyset page of the log at a time, so an export of a million units never holds them all."""

from __future__ import annotations

import csv
import io
import json
import sqlite3
from collections.abc import Iterable, Iterator, Sequence
from dataclasses import replace
from typing import Any

from stationcheck.quality.period import format_time
from stationcheck.shown_text import csv_cell
from stationcheck.store import queries
from stationcheck.store.records import AlarmRow, StepRow, UnitQuery, UnitRow

EXPORT_PAGE_UNITS = 1000
UNIT_FIELDS = (
    "serial", "status", "released", "first_time_through", "reworked", "passes", "started_at",
    "started_at_s", "ended_at", "ended_at_s", "cycle_time_s", "rework_time_s", "retries", "nok_results",
    "alarm_count", "failed_positions", "unfinished_positions",
)
STEP_FIELDS = (
    "seq", "serial", "pass_no", "rework", "step", "kind", "position", "position_number",
    "attempt", "max_attempts", "result", "position_result", "torque_nm", "torque_low_nm",
    "torque_high_nm", "angle_deg", "angle_low_deg", "angle_high_deg", "within_limits",
    "started_t_s", "ended_t_s", "recorded_at", "evidence_path",
)
ALARM_FIELDS = ("seq", "serial", "code", "severity", "subject", "message", "t_s", "recorded_at",
                "cleared_t_s")


def _time(value: float | None) -> str | None:
    return format_time(value) if value is not None else None


def unit_dict(unit: UnitRow) -> dict[str, Any]:
    return {
        "serial": unit.serial, "status": unit.status, "released": unit.released,
        "first_time_through": unit.first_time_through, "reworked": unit.reworked,
        "passes": unit.passes, "started_at": _time(unit.started_at_s),
        "started_at_s": unit.started_at_s, "ended_at": _time(unit.ended_at_s),
        "ended_at_s": unit.ended_at_s, "started_t_s": unit.started_t_s,
        "cycle_time_s": unit.cycle_time_s, "rework_time_s": unit.rework_time_s,
        "retries": unit.retries, "nok_results": unit.nok_results,
        "alarm_count": unit.alarm_count, "failed_positions": list(unit.failed_positions),
        "unfinished_positions": list(unit.unfinished_positions),
        "current_step": unit.current_step,
    }


def step_dict(step: StepRow) -> dict[str, Any]:
    return {
        "seq": step.seq, "serial": step.serial, "pass_no": step.pass_no, "rework": step.is_rework,
        "step": step.step, "kind": step.kind, "position": step.position,
        "position_number": step.position_number, "attempt": step.attempt,
        "max_attempts": step.max_attempts, "result": step.result,
        "position_result": step.position_result, "torque_nm": step.torque_nm,
        "torque_low_nm": step.torque_low_nm, "torque_high_nm": step.torque_high_nm,
        "angle_deg": step.angle_deg, "angle_low_deg": step.angle_low_deg,
        "angle_high_deg": step.angle_high_deg, "within_limits": step.within_limits,
        "started_t_s": step.started_t_s, "ended_t_s": step.ended_t_s,
        "recorded_at": _time(step.recorded_at_s), "evidence_path": step.evidence_path,
    }


def alarm_dict(alarm: AlarmRow) -> dict[str, Any]:
    return {
        "seq": alarm.seq, "serial": alarm.serial, "code": alarm.code,
        "severity": alarm.severity, "subject": alarm.subject, "message": alarm.message,
        "t_s": alarm.t_s, "recorded_at": _time(alarm.recorded_at_s),
        "cleared_t_s": alarm.cleared_t_s,
    }


def iter_units(conn: sqlite3.Connection, query: UnitQuery,
               page_units: int = EXPORT_PAGE_UNITS) -> Iterator[UnitRow]:
    """Every unit the query matches, read one keyset page at a time."""
    page_query = replace(query, limit=page_units, offset=0, after=None, count_total=False)
    broad = queries.prefix_is_broad(conn, query)
    while True:
        page = queries.find_units(conn, page_query, time_index=broad)
        yield from page.rows
        if page.next_after is None:
            return
        page_query = replace(page_query, after=page.next_after)


def _csv_cell(value: Any) -> Any:
    if isinstance(value, list):
        return csv_cell(";".join(str(v) for v in value))
    if isinstance(value, bool):
        return "true" if value else "false"
    return "" if value is None else csv_cell(value)


def csv_chunks(rows: Iterable[dict[str, Any]], fields: Sequence[str],
               rows_per_chunk: int = 500) -> Iterator[str]:
    """CSV text (header first) in chunks of rows; lists joined with ``;``; text that a
    spreadsheet would run as a formula starts with ``'``."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n")
    writer.writerow(fields)
    pending = 0
    for row in rows:
        writer.writerow([_csv_cell(row.get(name)) for name in fields])
        pending += 1
        if pending >= rows_per_chunk:
            yield buffer.getvalue()
            buffer.seek(0)
            buffer.truncate()
            pending = 0
    yield buffer.getvalue()


def json_array_chunks(rows: Iterable[dict[str, Any]], head: dict[str, Any] | None = None,
                      key: str = "units") -> Iterator[str]:
    """``{...head, key: [row, row, ...]}`` written row by row."""
    prefix = json.dumps(head or {}, ensure_ascii=False)[:-1]
    yield f"{prefix}{', ' if head else ''}\"{key}\": [\n"
    first = True
    for row in rows:
        yield ("" if first else ",\n") + json.dumps(row, ensure_ascii=False)
        first = False
    yield "\n]}\n"


def units_csv(conn: sqlite3.Connection, query: UnitQuery) -> Iterator[str]:
    return csv_chunks((unit_dict(u) for u in iter_units(conn, query)), UNIT_FIELDS)


def units_json(conn: sqlite3.Connection, query: UnitQuery) -> Iterator[str]:
    return json_array_chunks(unit_dict(u) for u in iter_units(conn, query))


def unit_detail(unit: UnitRow, steps: Sequence[StepRow],
                alarms: Sequence[AlarmRow]) -> dict[str, Any]:
    return {"unit": unit_dict(unit), "steps": [step_dict(s) for s in steps],
            "alarms": [alarm_dict(a) for a in alarms]}


def unit_steps_csv(steps: Sequence[StepRow]) -> str:
    return "".join(csv_chunks((step_dict(s) for s in steps), STEP_FIELDS))
