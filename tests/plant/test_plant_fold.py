"""The plant's units, steps, alarms and unit tags come from the station log's own projection:
folded on a real PostgreSQL server they equal, row for row, what the station's SQLite log
derived from the same events."""

from __future__ import annotations

import sqlite3
from pathlib import Path
from typing import Any

from plant_helpers import Station, forwarder

from stationcheck.core.events import Event
from stationcheck.plant.fold import fold_all, stored_event_from_row
from stationcheck.store.sql_tables import ALARM_COLUMNS, STEP_COLUMNS, TAG_COLUMNS, UNIT_COLUMNS
from stationcheck.store.sqlite_log import SqliteStepLog
from tests.event_examples import FULL, MINIMAL

EVENTS: list[Event] = [*FULL.values(), *MINIMAL.values()]
TABLES = {"units": (UNIT_COLUMNS, "serial"), "steps": (STEP_COLUMNS, "seq"),
          "alarms": (ALARM_COLUMNS, "seq"), "unit_tags": (TAG_COLUMNS, "tag, serial")}


def _normal(row: tuple[Any, ...]) -> tuple[Any, ...]:
    return tuple(float(v) if isinstance(v, int) and not isinstance(v, bool) else v for v in row)


def test_fold_on_the_server_equals_the_station_log(demo_log: Path, station: Station,
                                                   admin: Any) -> None:
    fwd = forwarder(demo_log, station)
    try:
        fwd.forward_once()
    finally:
        fwd.close()
    assert fold_all(admin, chunk_events=40) > 100  # small chunks: the fold resumes across them
    assert fold_all(admin) == 0  # nothing is folded twice
    _assert_same_rows(demo_log, station, admin)


def test_every_event_kind_round_trips_through_the_plant(station: Station, admin: Any,
                                                        tmp_path: Path) -> None:
    log_path = tmp_path / "kinds.sqlite"
    with SqliteStepLog(log_path, synchronous="OFF", station_id=station.station_id) as log:
        log.append(EVENTS, 1.7e9)
    fwd = forwarder(log_path, station)
    try:
        assert fwd.forward_once() == len(EVENTS)
    finally:
        fwd.close()
    rows = admin.execute("SELECT seq, t_s, kind, serial, data, recorded_at_s FROM plant.events "
                         "WHERE station_id = %s ORDER BY seq", (station.station_id,)).fetchall()
    assert [stored_event_from_row(row).event for row in rows] == EVENTS
    assert fold_all(admin) == len(EVENTS)
    _assert_same_rows(log_path, station, admin)


def _assert_same_rows(log_path: Path, station: Station, admin: Any) -> None:
    local = sqlite3.connect(f"file:{log_path}?mode=ro", uri=True)
    try:
        for table, (columns, order) in TABLES.items():
            names = ", ".join(columns)
            mine = local.execute(f"SELECT {names} FROM {table} ORDER BY {order}").fetchall()
            central = admin.execute(
                f"SELECT {names} FROM plant.{table} WHERE station_id = %s ORDER BY {order}",
                (station.station_id,)).fetchall()
            assert len(mine) > 0 or table == "alarms"
            assert [_normal(r) for r in central] == [_normal(r) for r in mine], table
    finally:
        local.close()
