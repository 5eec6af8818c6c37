"""Versioned migrations: an old log opens with the current code and gets its derived tables."""

from __future__ import annotations

import sqlite3
from pathlib import Path

import pytest
from step_log_helpers import RECORDED_AT_S, table_rows

from stationcheck.errors import StoreError
from stationcheck.store import SqliteStepLog, log_schema
from stationcheck.store.sql_tables import dump_json
from stationcheck.store.sqlite_log import refill_derived
from stationcheck.store.synthetic import UnitStream


def stream_events(units: int) -> list[tuple[float, str, str | None, str, float]]:
    rows = []
    for index, (_, batches) in enumerate(UnitStream(7).units(units)):
        for batch in batches:
            rows += [(e.t_s, e.kind, e.serial, dump_json(e.to_data()), RECORDED_AT_S + index)
                     for e in batch]
    return rows


def make_v1(path: Path, units: int) -> list[tuple[float, str, str | None, str, float]]:
    """A log as the first schema wrote it: the events table only."""
    rows = stream_events(units)
    conn = sqlite3.connect(path, isolation_level=None)
    log_schema.migrate(conn, refill_derived, upto=1)
    conn.execute("BEGIN")
    conn.executemany(
        "INSERT INTO events (t_s, kind, serial, data, recorded_at_s) VALUES (?, ?, ?, ?, ?)", rows
    )
    conn.execute("COMMIT")
    conn.close()
    return rows


def test_v1_log_opens_with_current_code(tmp_path: Path) -> None:
    old, fresh = tmp_path / "v1.sqlite", tmp_path / "fresh.sqlite"
    rows = make_v1(old, 12)
    conn = sqlite3.connect(old)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == 1
    tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_schema WHERE type='table'")}
    assert "units" not in tables
    conn.close()
    with SqliteStepLog(old) as log:
        assert log.connection.execute("PRAGMA user_version").fetchone()[0] == log_schema.SCHEMA_VERSION
        assert log.units().total == 12
        assert len(log.events()) == len(rows)
    # the same events appended through the current code give the same rows
    with SqliteStepLog(fresh) as log:
        log.connection.execute("BEGIN")
        log.connection.executemany(
            "INSERT INTO events (t_s, kind, serial, data, recorded_at_s) VALUES (?, ?, ?, ?, ?)",
            rows,
        )
        log.connection.execute("COMMIT")
        log.rebuild()
    assert table_rows(old) == table_rows(fresh)


def test_reader_asks_for_a_writer_to_update_an_old_log(tmp_path: Path) -> None:
    path = tmp_path / "v1.sqlite"
    make_v1(path, 1)
    with pytest.raises(StoreError, match="open it once for writing"):
        SqliteStepLog(path, readonly=True)


def test_failing_migration_leaves_the_old_version(tmp_path: Path,
                                                  monkeypatch: pytest.MonkeyPatch) -> None:
    path = tmp_path / "log.sqlite"
    make_v1(path, 2)

    def broken(conn: sqlite3.Connection) -> bool:
        conn.execute("CREATE TABLE half_done (x)")
        raise sqlite3.OperationalError("simulated failure")

    monkeypatch.setattr(log_schema, "MIGRATIONS", (log_schema.MIGRATIONS[0], broken))
    with pytest.raises(StoreError, match="simulated failure"):
        SqliteStepLog(path)
    conn = sqlite3.connect(path)
    assert conn.execute("PRAGMA user_version").fetchone()[0] == 1
    tables = {r[0] for r in conn.execute("SELECT name FROM sqlite_schema WHERE type='table'")}
    assert "half_done" not in tables and conn.execute("SELECT count(*) FROM events").fetchone()[0]
    conn.close()


def test_migrations_are_numbered_by_position() -> None:
    assert log_schema.SCHEMA_VERSION == len(log_schema.MIGRATIONS) >= 2
    assert len(set(log_schema.MIGRATIONS)) == len(log_schema.MIGRATIONS)


def test_v3_log_gets_the_station_id_column(tmp_path: Path) -> None:
    """Events written before the station had an id keep NULL; new ones carry the config's id."""
    path = tmp_path / "v3.sqlite"
    rows = stream_events(2)
    conn = sqlite3.connect(path, isolation_level=None)
    log_schema.migrate(conn, refill_derived, upto=3)
    conn.execute("BEGIN")
    conn.executemany(
        "INSERT INTO events (t_s, kind, serial, data, recorded_at_s) VALUES (?, ?, ?, ?, ?)", rows)
    conn.execute("COMMIT")
    conn.close()
    with SqliteStepLog(path, station_id="cover-7") as log:
        assert log_schema.schema_version(log.connection) == log_schema.SCHEMA_VERSION
        log.append([e.event for e in log.events(limit=1)], RECORDED_AT_S + 99)
        owners = [r[6] for r in log.raw_events(0, 10_000)]
    assert owners == [None] * len(rows) + ["cover-7"]
