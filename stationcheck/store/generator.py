"""Fast writing of large synthetic step logs (DEMO DATA) for benchmarks.

Folding millions of events one by one in Python takes too long for a million-unit log, so each
story of :mod:`stationcheck.store.synthetic` is folded once (by the real projection) into
template rows, and every generated unit is written as that story's event rows and derived rows
with its own serial, times and tightening values filled in. The result is what the live append
path would have written: ``rebuild()`` on a generated log gives identical rows (a test checks it).
"""

from __future__ import annotations

import re
import sqlite3
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from stationcheck.core import event_kinds as ev
from stationcheck.store.log_records import StoredEvent
from stationcheck.store.memory_log import MemoryTables
from stationcheck.store.projection import project
from stationcheck.store.sql_tables import (
    ALARM_COLUMNS,
    STEP_COLUMNS,
    TAG_COLUMNS,
    UNIT_COLUMNS,
    alarm_to_sql,
    dump_json,
    insert_sql,
    step_to_sql,
    unit_to_sql,
)
from stationcheck.store.sqlite_errors import store_errors
from stationcheck.store.sqlite_log import SqliteStepLog
from stationcheck.store.synthetic import (
    ANGLE_DEG,
    TORQUE_NM,
    Story,
    UnitDraw,
    UnitStream,
    is_time_key,
    shift_time,
)
from stationcheck.store.write_transaction import write_transaction

GENERATE_CHUNK_UNITS = 2_000
_SLOT = re.compile(r'"@@(\d+)@@"')
_UNIT_TIMES = ("started_t_s", "started_at_s", "ended_t_s", "ended_at_s")
_UNIT_DURATIONS = ("cycle_time_s", "rework_time_s")
_STEP_TIMES = ("started_t_s", "ended_t_s", "recorded_at_s")
_ALARM_TIMES = ("t_s", "recorded_at_s", "cleared_t_s")


@dataclass(frozen=True)
class EventTemplate:
    t_s: float
    kind: str
    unit_serial: bool
    parts: tuple[str, ...]  # JSON text around the slots
    slots: tuple[tuple[str, float], ...]  # (what, story value)
    tightening: int  # index of the tightening result, -1 for other events


@dataclass(frozen=True)
class StoryTemplate:
    events: tuple[EventTemplate, ...]
    unit: tuple[Any, ...]
    steps: tuple[tuple[tuple[Any, ...], int], ...]  # (row, tightening index or -1)
    alarms: tuple[tuple[Any, ...], ...]
    tags: tuple[str, ...]


def _compile_event(
    kind: str, data: dict[str, Any], tightening: int
) -> tuple[tuple[str, ...], tuple[tuple[str, float], ...]]:
    slots: list[tuple[str, float]] = []

    def slot(what: str, value: float) -> str:
        slots.append((what, value))
        return f"@@{len(slots) - 1}@@"

    marked: dict[str, Any] = {}
    for key, value in data.items():
        if is_time_key(key, value):
            value = slot("time", value)
        elif key == "cycle_time_s" and isinstance(value, float):
            value = slot("duration", value)
        elif tightening >= 0 and key in ("torque", "angle"):
            value = {**value, "value": slot(key, 0.0)}
        elif tightening >= 0 and key in ("within_limits", "sequence"):
            value = slot(key, 0.0)
        marked[key] = value
    pieces = _SLOT.split(dump_json(marked))
    parts, order = tuple(pieces[0::2]), [int(i) for i in pieces[1::2]]
    return parts, tuple(slots[i] for i in order)


def compile_story(story: Story) -> StoryTemplate:
    """The story's events as text templates and its rows as folded by the projection (story
    time 0, pace 1, seq from 1, recorded at each event's own time)."""
    tables = MemoryTables()
    events: list[EventTemplate] = []
    tightening_of_seq: dict[int, int] = {}
    count = 0
    for seq, event in enumerate((e for b in story.batches for e in b), start=1):
        project(StoredEvent(seq, event.t_s, event), tables)
        index = count if isinstance(event, ev.TighteningResult) else -1
        if index >= 0:
            tightening_of_seq[seq] = index
            count += 1
        parts, slots = _compile_event(event.kind, event.to_data(), index)
        events.append(
            EventTemplate(event.t_s, event.kind, event.serial is not None, parts, slots, index)
        )
    (unit,) = tables.units.values()
    steps = tuple((step_to_sql(s), tightening_of_seq.get(s.seq, -1)) for s in tables.steps.values())
    return StoryTemplate(
        tuple(events),
        unit_to_sql(unit),
        steps,
        tuple(alarm_to_sql(a) for a in tables.alarms.values()),
        tuple(tag for tag, _ in tables.tags),
    )


def _render(what: str, value: float, draw: UnitDraw, values: tuple[float, float, int]) -> str:
    if what == "time":
        return repr(shift_time(value, draw))
    if what == "duration":
        return repr(value * draw.pace)
    torque, angle, sequence = values
    if what == "torque":
        return repr(torque)
    if what == "angle":
        return repr(angle)
    if what == "sequence":
        return str(sequence)
    return "true" if TORQUE_NM.contains(torque) and ANGLE_DEG.contains(angle) else "false"


class _Rows:
    """One chunk's rows, ready for ``executemany``."""

    def __init__(self) -> None:
        self.events: list[tuple[Any, ...]] = []
        self.units: list[tuple[Any, ...]] = []
        self.steps: list[tuple[Any, ...]] = []
        self.alarms: list[tuple[Any, ...]] = []
        self.tags: list[tuple[Any, ...]] = []


def _index(columns: tuple[str, ...], names: tuple[str, ...]) -> tuple[int, ...]:
    return tuple(columns.index(n) for n in names)


_U_TIMES, _U_DURS = _index(UNIT_COLUMNS, _UNIT_TIMES), _index(UNIT_COLUMNS, _UNIT_DURATIONS)
_U_SERIAL, _U_OPEN = UNIT_COLUMNS.index("serial"), UNIT_COLUMNS.index("open_seq")
_S_TIMES = _index(STEP_COLUMNS, _STEP_TIMES)
_S_SEQ, _S_SERIAL = STEP_COLUMNS.index("seq"), STEP_COLUMNS.index("serial")
_S_VALUES = _index(STEP_COLUMNS, ("torque_nm", "angle_deg", "within_limits", "sequence"))
_A_TIMES = _index(ALARM_COLUMNS, _ALARM_TIMES)
_A_SEQ, _A_SERIAL = ALARM_COLUMNS.index("seq"), ALARM_COLUMNS.index("serial")


def _add_unit(rows: _Rows, template: StoryTemplate, draw: UnitDraw, base_seq: int) -> int:
    for offset, e in enumerate(template.events):
        values = draw.tightenings[e.tightening] if e.tightening >= 0 else (0.0, 0.0, 0)
        pieces = [e.parts[0]]
        for (what, value), tail in zip(e.slots, e.parts[1:], strict=True):
            pieces += (_render(what, value, draw, values), tail)
        t_s = shift_time(e.t_s, draw)
        rows.events.append(
            (
                base_seq + offset,
                t_s,
                e.kind,
                draw.serial if e.unit_serial else None,
                "".join(pieces),
                t_s,
            )
        )
    unit = list(template.unit)
    unit[_U_SERIAL] = draw.serial
    for i in _U_TIMES:
        unit[i] = shift_time(unit[i], draw) if unit[i] is not None else None
    for i in _U_DURS:
        unit[i] = unit[i] * draw.pace if unit[i] is not None else None
    if unit[_U_OPEN] is not None:
        unit[_U_OPEN] += base_seq - 1
    rows.units.append(tuple(unit))
    started = (unit[UNIT_COLUMNS.index("started_t_s")], unit[UNIT_COLUMNS.index("started_at_s")])
    rows.tags += [(tag, draw.serial, *started) for tag in template.tags]
    for template_step, tightening in template.steps:
        step = list(template_step)
        step[_S_SEQ] += base_seq - 1
        step[_S_SERIAL] = draw.serial
        for i in _S_TIMES:
            step[i] = shift_time(step[i], draw) if step[i] is not None else None
        if tightening >= 0:
            torque, angle, sequence = draw.tightenings[tightening]
            within = _render("within", 0.0, draw, draw.tightenings[tightening]) == "true"
            for i, value in zip(_S_VALUES, (torque, angle, within, sequence), strict=True):
                step[i] = value
        rows.steps.append(tuple(step))
    for template_alarm in template.alarms:
        alarm = list(template_alarm)
        alarm[_A_SEQ] += base_seq - 1
        alarm[_A_SERIAL] = draw.serial if alarm[_A_SERIAL] is not None else None
        for i in _A_TIMES:
            alarm[i] = shift_time(alarm[i], draw) if alarm[i] is not None else None
        rows.alarms.append(tuple(alarm))
    return base_seq + len(template.events)


def _write(conn: sqlite3.Connection, rows: _Rows) -> None:
    with write_transaction(conn):
        conn.executemany(
            "INSERT INTO events (seq, t_s, kind, serial, data, recorded_at_s) "
            "VALUES (?, ?, ?, ?, ?, ?)",
            rows.events,
        )
        conn.executemany(insert_sql("units", UNIT_COLUMNS), rows.units)
        conn.executemany(insert_sql("steps", STEP_COLUMNS), rows.steps)
        conn.executemany(insert_sql("alarms", ALARM_COLUMNS), rows.alarms)
        conn.executemany(insert_sql("unit_tags", TAG_COLUMNS), rows.tags)


def generate_log(
    path: Path, units: int, seed: int = 0, progress: Callable[[int], None] | None = None
) -> int:
    """Write ``units`` synthetic units (DEMO DATA) into a new step log; returns the event count.

    ``GENERATE_CHUNK_UNITS`` units per transaction, synchronous OFF (a generated log that is
    lost is simply generated again). Each event is recorded at its own ``t_s``.
    """
    stream = UnitStream(seed)
    templates = [compile_story(s) for s in stream.stories]
    with SqliteStepLog(path, synchronous="OFF") as log:
        conn = log.connection
        if conn.execute("SELECT count(*) FROM events").fetchone()[0]:
            raise ValueError(f"step log {path} already has events; generate into a new file")
        seq, done = 1, 0
        while done < units:
            rows = _Rows()
            chunk = min(GENERATE_CHUNK_UNITS, units - done)
            for _ in range(chunk):
                draw = stream.next_draw()
                seq = _add_unit(rows, templates[draw.story], draw, seq)
            with store_errors(path, "writing generated units"):
                _write(conn, rows)
            done += chunk
            if progress is not None:
                progress(done)
    return seq - 1
