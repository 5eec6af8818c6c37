"""Folds the events stations forwarded into the plant's units, steps, alarms and unit tags with
the station log's own projection (:func:`stationcheck.store.projection.project`): one
definition of what a row says, whichever database holds it.

Runs with the database owner's role (stations may not write derived rows): ``stationcheck plant
fold``. Each station's events are folded in its own seq order, in chunks, each chunk in one
transaction with the station's ``folded_seq``, so a fold stopped at any point resumes where it
left off and never folds an event twice.
"""

from __future__ import annotations

import json
import logging
from typing import Any

from stationcheck.core.events import Event
from stationcheck.errors import StoreError
from stationcheck.store.log_records import StoredEvent
from stationcheck.store.projection import project
from stationcheck.store.sql_tables import (
    ALARM_COLUMNS,
    STEP_COLUMNS,
    TAG_COLUMNS,
    UNIT_COLUMNS,
    BufferedSqlTables,
    alarm_to_sql,
    step_to_sql,
    unit_to_sql,
)

logger = logging.getLogger(__name__)

FOLD_CHUNK_EVENTS = 20_000


def _ints(values: tuple[Any, ...]) -> tuple[Any, ...]:
    """PostgreSQL keeps the 0/1 flags as integers, as SQLite does (the shared SQL says ``= 1``)."""
    return tuple(int(v) if isinstance(v, bool) else v for v in values)


def _upsert(table: str, columns: tuple[str, ...], key: tuple[str, ...], update: bool) -> str:
    names = ("station_id", *columns)
    action = (
        "DO UPDATE SET " + ", ".join(f"{c} = excluded.{c}" for c in columns if c not in key)
        if update
        else "DO NOTHING"
    )
    return (
        f"INSERT INTO plant.{table} ({', '.join(names)}) VALUES "
        f"({', '.join('%s' for _ in names)}) ON CONFLICT ({', '.join(key)}) {action}"
    )


_UNITS_SQL = _upsert("units", UNIT_COLUMNS, ("station_id", "serial"), True)
_STEPS_SQL = _upsert("steps", STEP_COLUMNS, ("station_id", "seq"), False)
_ALARMS_SQL = _upsert("alarms", ALARM_COLUMNS, ("station_id", "seq"), False)
_TAGS_SQL = _upsert("unit_tags", TAG_COLUMNS, ("station_id", "tag", "serial"), False)


class PlantTables(BufferedSqlTables):
    """The projection's tables for one station in the plant database (PostgreSQL dialect):
    the same buffering as the station's log, rows keyed by station id as well."""

    def __init__(self, conn: Any, station_id: str) -> None:
        super().__init__(conn)
        self.station_id = station_id

    def _stored_unit(self, serial: str) -> Any:
        return self._conn.execute(
            f"SELECT {', '.join(UNIT_COLUMNS)} FROM plant.units WHERE station_id = %s AND "
            "serial = %s",
            (self.station_id, serial),
        ).fetchone()

    def _store_position_result(
        self, serial: str, pass_no: int, step: str, position: str, result: str
    ) -> None:
        self._conn.execute(
            "UPDATE plant.steps SET position_result = %s WHERE station_id = %s AND seq = ("
            "SELECT seq FROM plant.steps WHERE station_id = %s AND serial = %s AND pass_no = %s "
            "AND step = %s AND position = %s ORDER BY seq DESC LIMIT 1)",
            (result, self.station_id, self.station_id, serial, pass_no, step, position),
        )

    def _store_cleared(self, code: str, subject: str, cleared_t_s: float) -> None:
        self._conn.execute(
            "UPDATE plant.alarms SET cleared_t_s = %s WHERE station_id = %s AND seq = (SELECT "
            "max(seq) FROM plant.alarms WHERE station_id = %s AND code = %s AND subject = %s "
            "AND cleared_t_s IS NULL)",
            (cleared_t_s, self.station_id, self.station_id, code, subject),
        )

    def flush(self) -> None:
        station = (self.station_id,)
        conn: Any = self._conn  # a psycopg connection here
        with conn.cursor() as cur:
            if self._dirty:
                cur.executemany(
                    _UNITS_SQL, [station + _ints(unit_to_sql(self._units[s])) for s in self._dirty]
                )
            if self._steps:
                cur.executemany(
                    _STEPS_SQL, [station + _ints(step_to_sql(s)) for s in self._steps.values()]
                )
            if self._alarms:
                cur.executemany(
                    _ALARMS_SQL, [station + alarm_to_sql(a) for a in self._alarms.values()]
                )
            if self._tags:
                cur.executemany(
                    _TAGS_SQL,
                    [
                        (*station, tag, serial, *times)
                        for (tag, serial), times in self._tags.items()
                    ],
                )
        self.discard()


def stored_event_from_row(row: tuple[Any, ...]) -> StoredEvent:
    """A row of ``plant.events`` as the typed event the station logged."""
    seq, t_s, kind, serial, data, recorded_at_s = row
    try:
        event = Event.from_data(float(t_s), kind, serial, json.loads(data))
    except ValueError as exc:  # also json.JSONDecodeError
        raise StoreError(f"plant event {seq} ({kind}) is malformed: {exc}") from exc
    return StoredEvent(int(seq), float(recorded_at_s), event)


def fold_station(conn: Any, station_id: str, chunk_events: int = FOLD_CHUNK_EVENTS) -> int:
    """Fold one station's events not yet folded; returns how many were folded."""
    count = 0
    while True:
        with conn.transaction():
            conn.execute(
                "SELECT pg_advisory_xact_lock(hashtext('stationcheck fold ' || %s))", (station_id,)
            )
            row = conn.execute(
                "SELECT folded_seq FROM plant.stations WHERE station_id = %s", (station_id,)
            ).fetchone()
            folded = int(row[0])
            rows = conn.execute(
                "SELECT seq, t_s, kind, serial, data, recorded_at_s FROM plant.events WHERE "
                "station_id = %s AND seq > %s ORDER BY seq LIMIT %s",
                (station_id, folded, chunk_events),
            ).fetchall()
            if not rows:
                return count
            tables = PlantTables(conn, station_id)
            for event_row in rows:
                project(stored_event_from_row(event_row), tables)
            tables.flush()
            conn.execute(
                "UPDATE plant.stations SET folded_seq = %s WHERE station_id = %s",
                (int(rows[-1][0]), station_id),
            )
        count += len(rows)


def fold_all(conn: Any, chunk_events: int = FOLD_CHUNK_EVENTS) -> int:
    """Fold every station's new events; returns how many were folded."""
    stations = conn.execute(
        "SELECT station_id FROM plant.stations WHERE last_seq > folded_seq ORDER BY station_id"
    ).fetchall()
    total = 0
    for (station_id,) in stations:
        folded = fold_station(conn, str(station_id), chunk_events)
        if folded:
            logger.info("folded %d events of station %s", folded, station_id)
        total += folded
    return total
