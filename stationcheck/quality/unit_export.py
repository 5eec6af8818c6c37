"""Units, a unit's steps and alarms as plain dicts, CSV and JSON. Lists are written in chunks,
one keyset page of the log at a time, so an export of a million units never holds them all.

Results are in the shown words (OK, NOK, aborted, open: :mod:`stationcheck.core.result_words`);
measured values are rounded to what a tightening controller reports (common practice, no
source: torque to 0.01 N·m, angle to 0.1°), times to the millisecond; every wall-clock time is
given twice, as ISO 8601 with its UTC offset (``*_at``) and as epoch seconds (``*_at_s``).
"""

from __future__ import annotations

import csv
import io
import json
import sqlite3
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import replace
from typing import Any

from stationcheck.core.events import RESULT_NOK
from stationcheck.core.result_words import VOCABULARY_NOTE, unit_word
from stationcheck.quality.period import format_time
from stationcheck.shown_text import csv_cell
from stationcheck.store import queries
from stationcheck.store.log_records import AlarmRow, StepRow, UnitQuery, UnitRow

EXPORT_PAGE_UNITS = 1000
TORQUE_DIGITS = 2  # 0.01 N·m
ANGLE_DIGITS = 1  # 0.1 degree
TIME_DIGITS = 3  # 1 ms
UNIT_FIELDS = (
    "serial",
    "status",
    "released",
    "first_time_through",
    "reworked",
    "passes",
    "started_at",
    "started_at_s",
    "ended_at",
    "ended_at_s",
    "cycle_time_s",
    "rework_time_s",
    "retries",
    "nok_results",
    "alarm_count",
    "failed_positions",
    "unfinished_positions",
    "ended_by",
    "nok_reason",
)
STEP_FIELDS = (
    "seq",
    "serial",
    "pass_no",
    "rework",
    "step",
    "kind",
    "position",
    "position_number",
    "attempt",
    "max_attempts",
    "result",
    "position_result",
    "torque_nm",
    "torque_low_nm",
    "torque_high_nm",
    "angle_deg",
    "angle_low_deg",
    "angle_high_deg",
    "within_limits",
    "started_t_s",
    "ended_t_s",
    "recorded_at",
    "recorded_at_s",
    "evidence_path",
)
ALARM_FIELDS = (
    "seq",
    "serial",
    "code",
    "severity",
    "subject",
    "message",
    "t_s",
    "recorded_at",
    "recorded_at_s",
    "cleared_t_s",
)
# why a unit ended NOK, by how it ended, where no position failed
ENDED_BY_WORDS = {
    "check_failed": "a check failed",
    "stopped_on_failure": "stopped at a failure",
    "abort": "aborted",
    "new_unit": "replaced by the next unit before it ended",
}


def _time(value: float | None) -> str | None:
    return format_time(value) if value is not None else None


def _r(value: float | None, digits: int) -> float | None:
    return None if value is None else round(value, digits)


def _word(result: str | None) -> str | None:
    return None if result is None else unit_word(result)


def nok_reason(unit: UnitRow, steps: Sequence[StepRow] = ()) -> str | None:
    """Why the unit is (or its first pass was) NOK, in words; None for a unit that never was.
    With its steps: each failed position with its last values, each failed check with what
    it saw; without: the failed positions and how the unit ended."""
    if RESULT_NOK not in (unit.status, unit.first_result):
        return None
    found: list[str] = []
    for step in steps:
        if step.kind == "fasten" and step.position_result == RESULT_NOK:
            values = ", ".join(
                v
                for v in (
                    None if step.torque_nm is None else f"torque {step.torque_nm:.2f} N·m",
                    None if step.angle_deg is None else f"angle {step.angle_deg:.1f}°",
                )
                if v
            )
            found.append(
                f"{step.position} NOK after {step.attempt} attempt(s)"
                + (f" ({values})" if values else "")
            )
        elif step.kind == "check" and step.result == RESULT_NOK:
            zone, seen = step.detail.get("zone"), step.detail.get("verdict")
            expect = step.detail.get("expect")
            found.append(
                f"check {step.step}{f' at {zone}' if zone else ''} failed"
                + (f": expected {expect}, saw {seen}" if expect and seen else "")
            )
    if not found and unit.failed_positions:
        found.append(f"NOK at {', '.join(unit.failed_positions)}")
    if not found and unit.ended_by:
        found.append(ENDED_BY_WORDS.get(unit.ended_by, unit.ended_by.replace("_", " ")))
    return "; ".join(found) or None


def unit_dict(unit: UnitRow) -> dict[str, Any]:
    return {
        "serial": unit.serial,
        "status": unit_word(unit.status),
        "released": unit.released,
        "first_time_through": unit.first_time_through,
        "reworked": unit.reworked,
        "passes": unit.passes,
        "started_at": _time(unit.started_at_s),
        "started_at_s": _r(unit.started_at_s, TIME_DIGITS),
        "ended_at": _time(unit.ended_at_s),
        "ended_at_s": _r(unit.ended_at_s, TIME_DIGITS),
        "started_t_s": _r(unit.started_t_s, TIME_DIGITS),
        "cycle_time_s": _r(unit.cycle_time_s, TIME_DIGITS),
        "rework_time_s": _r(unit.rework_time_s, TIME_DIGITS),
        "retries": unit.retries,
        "nok_results": unit.nok_results,
        "alarm_count": unit.alarm_count,
        "failed_positions": list(unit.failed_positions),
        "unfinished_positions": list(unit.unfinished_positions),
        "current_step": unit.current_step,
        "ended_by": unit.ended_by,
        "first_result": _word(unit.first_result),
        "nok_reason": nok_reason(unit),
    }


def step_dict(step: StepRow) -> dict[str, Any]:
    return {
        "seq": step.seq,
        "serial": step.serial,
        "pass_no": step.pass_no,
        "rework": step.is_rework,
        "step": step.step,
        "kind": step.kind,
        "position": step.position,
        "position_number": step.position_number,
        "attempt": step.attempt,
        "max_attempts": step.max_attempts,
        "result": unit_word(step.result),
        "position_result": _word(step.position_result),
        "torque_nm": _r(step.torque_nm, TORQUE_DIGITS),
        "torque_low_nm": _r(step.torque_low_nm, TORQUE_DIGITS),
        "torque_high_nm": _r(step.torque_high_nm, TORQUE_DIGITS),
        "angle_deg": _r(step.angle_deg, ANGLE_DIGITS),
        "angle_low_deg": _r(step.angle_low_deg, ANGLE_DIGITS),
        "angle_high_deg": _r(step.angle_high_deg, ANGLE_DIGITS),
        "within_limits": step.within_limits,
        "started_t_s": _r(step.started_t_s, TIME_DIGITS),
        "ended_t_s": _r(step.ended_t_s, TIME_DIGITS),
        "recorded_at": _time(step.recorded_at_s),
        "recorded_at_s": _r(step.recorded_at_s, TIME_DIGITS),
        "evidence_path": step.evidence_path,
    }


def alarm_dict(alarm: AlarmRow) -> dict[str, Any]:
    return {
        "seq": alarm.seq,
        "serial": alarm.serial,
        "code": alarm.code,
        "severity": alarm.severity,
        "subject": alarm.subject,
        "message": alarm.message,
        "t_s": _r(alarm.t_s, TIME_DIGITS),
        "recorded_at": _time(alarm.recorded_at_s),
        "recorded_at_s": _r(alarm.recorded_at_s, TIME_DIGITS),
        "cleared_t_s": _r(alarm.cleared_t_s, TIME_DIGITS),
    }


def iter_units(
    conn: sqlite3.Connection, query: UnitQuery, page_units: int = EXPORT_PAGE_UNITS
) -> Iterator[UnitRow]:
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


def csv_chunks(
    rows: Iterable[dict[str, Any]], fields: Sequence[str], rows_per_chunk: int = 500
) -> Iterator[str]:
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


def json_array_chunks(
    rows: Iterable[dict[str, Any]], head: dict[str, Any] | None = None, key: str = "units"
) -> Iterator[str]:
    """``{...head, key: [row, row, ...]}`` written row by row."""
    prefix = json.dumps(head or {}, ensure_ascii=False)[:-1]
    yield f'{prefix}{", " if head else ""}"{key}": [\n'
    first = True
    for row in rows:
        yield ("" if first else ",\n") + json.dumps(row, ensure_ascii=False)
        first = False
    yield "\n]}\n"


def units_csv(conn: sqlite3.Connection, query: UnitQuery) -> Iterator[str]:
    return csv_chunks((unit_dict(u) for u in iter_units(conn, query)), UNIT_FIELDS)


def units_json(conn: sqlite3.Connection, query: UnitQuery) -> Iterator[str]:
    return json_array_chunks(
        (unit_dict(u) for u in iter_units(conn, query)), {"results_note": VOCABULARY_NOTE}
    )


def unit_detail(
    unit: UnitRow, steps: Sequence[StepRow], alarms: Sequence[AlarmRow]
) -> dict[str, Any]:
    shown = unit_dict(unit)
    shown["nok_reason"] = nok_reason(unit, steps)
    return {
        "unit": shown,
        "steps": [step_dict(s) for s in steps],
        "alarms": [alarm_dict(a) for a in alarms],
        "results_note": VOCABULARY_NOTE,
    }


MEASURE_COLUMNS = {"torque": ("torque_nm", TORQUE_DIGITS), "angle": ("angle_deg", ANGLE_DIGITS)}


def trend_csv(body: Mapping[str, Any]) -> Iterator[str]:
    """A trend (``json_views.trend_dict``) as CSV: one row per unit with its final value and
    EWMA, named with their unit, and its record time as ISO 8601 and epoch seconds."""
    column, digits = MEASURE_COLUMNS[str(body["measure"])]
    statistics = (body.get("ewma") or {}).get("statistics") or [None] * len(body["points"])
    rows = (
        {
            "seq": p["seq"],
            "serial": p["serial"],
            "recorded_at": _time(p["recorded_at_s"]),
            "recorded_at_s": _r(p["recorded_at_s"], TIME_DIGITS),
            column: _r(p["value"], digits),
            f"ewma_{column}": _r(statistics[i], digits + 1),
        }
        for i, p in enumerate(body["points"])
    )
    fields = ("seq", "serial", "recorded_at", "recorded_at_s", column, f"ewma_{column}")
    return csv_chunks(rows, fields)


def unit_steps_csv(steps: Sequence[StepRow]) -> str:
    return "".join(csv_chunks((step_dict(s) for s in steps), STEP_FIELDS))
