"""The step log in one SQLite file: append-only events plus derived units, steps and alarms.

Durability: WAL journal with ``synchronous=FULL``; :meth:`SqliteStepLog.append` inserts a batch
of events and folds them into the derived tables in one transaction and returns only after the
commit reached the disk, so the station may take its next step only once its result is saved.
Readers (the review) open the file with ``readonly=True`` (an SQLite ``mode=ro`` connection)
and are safe while the station writes.
"""

from __future__ import annotations

import json
import logging
import os
import sqlite3
from collections.abc import Iterable, Sequence
from pathlib import Path
from types import TracebackType
from typing import Any, Literal, Self
from urllib.parse import quote

from stationcheck.core.events import Event
from stationcheck.core.progress import UnitProgress, rebuild_unit
from stationcheck.errors import StoreError
from stationcheck.store import log_schema, queries
from stationcheck.store.log_records import (
    AlarmRow,
    Page,
    StepRow,
    StoredEvent,
    TimeBasis,
    UnitQuery,
    UnitRow,
)
from stationcheck.store.projection import project
from stationcheck.store.sql_tables import BufferedSqlTables, dump_json
from stationcheck.store.sqlite_errors import store_errors
from stationcheck.store.step_log import checked_batch
from stationcheck.store.write_transaction import write_transaction

logger = logging.getLogger(__name__)

Synchronous = Literal["FULL", "NORMAL", "OFF"]
SYNCHRONOUS_MODES: tuple[str, ...] = ("FULL", "NORMAL", "OFF")
REFILL_CHUNK_EVENTS = 20_000
_EVENT_COLUMNS = "seq, t_s, kind, serial, data, recorded_at_s"


def stored_event_from_sql(row: Sequence[Any]) -> StoredEvent:
    seq, t_s, kind, serial, data, recorded_at_s = row
    try:
        event = Event.from_data(t_s, kind, serial, json.loads(data))
    except ValueError as exc:  # also json.JSONDecodeError
        raise StoreError(f"stored event {seq} is malformed: {exc}") from exc
    return StoredEvent(seq=int(seq), recorded_at_s=float(recorded_at_s), event=event)


def refill_derived(conn: sqlite3.Connection, chunk_events: int = REFILL_CHUNK_EVENTS) -> int:
    """Fold every event into the (empty) derived tables, in chunks; returns the event count."""
    tables = BufferedSqlTables(conn)
    last_seq, count = 0, 0
    while True:
        rows = conn.execute(
            f"SELECT {_EVENT_COLUMNS} FROM events WHERE seq > ? ORDER BY seq LIMIT ?",
            (last_seq, chunk_events),
        ).fetchall()
        if not rows:
            break
        for row in rows:
            project(stored_event_from_sql(row), tables)
        tables.flush()
        last_seq, count = int(rows[-1][0]), count + len(rows)
    return count


def _check_identity(conn: sqlite3.Connection, path: Path) -> int:
    """The schema version of a file that is (or can become) a step log."""
    version = log_schema.schema_version(conn)
    app_id = log_schema.application_id(conn)
    if app_id not in (0, log_schema.APPLICATION_ID) or (
        app_id == 0 and log_schema.has_tables(conn)
    ):
        raise StoreError(f"step log {path} is an SQLite file of another program, not a step log")
    if version > log_schema.SCHEMA_VERSION:
        raise StoreError(
            f"step log {path} has schema version {version}, newer than this stationcheck "
            f"knows ({log_schema.SCHEMA_VERSION}); use a newer stationcheck to open it"
        )
    return version


class SqliteStepLog:
    """The station's step log; see the module docstring for durability and readers."""

    def __init__(
        self,
        path: str | os.PathLike[str],
        *,
        readonly: bool = False,
        synchronous: Synchronous = "FULL",
        busy_timeout_ms: int = 5000,
        station_id: str | None = None,
    ) -> None:
        if synchronous not in SYNCHRONOUS_MODES:
            raise ValueError(f"synchronous must be one of {SYNCHRONOUS_MODES}, got {synchronous!r}")
        self.path = Path(path)
        self.readonly = readonly
        self.station_id = station_id  # stored with every event this log appends
        self._conn = (
            self._open_reader(busy_timeout_ms)
            if readonly
            else self._open_writer(synchronous, busy_timeout_ms)
        )

    def _open_reader(self, busy_timeout_ms: int) -> sqlite3.Connection:
        if not self.path.is_file():
            raise StoreError(f"step log {self.path} does not exist")
        uri = f"file:{quote(str(self.path.resolve()))}?mode=ro"
        with store_errors(self.path, "opening for reading"):
            conn = sqlite3.connect(
                uri, uri=True, isolation_level=None, timeout=busy_timeout_ms / 1000.0
            )
            try:
                version = _check_identity(conn, self.path)
                conn.execute("PRAGMA query_only = ON")
            except BaseException:
                conn.close()
                raise
        if version < log_schema.SCHEMA_VERSION:
            conn.close()
            raise StoreError(
                f"step log {self.path} has schema version {version}; open it once for writing "
                f"(e.g. by the station) to update it to {log_schema.SCHEMA_VERSION}"
            )
        return conn

    def _open_writer(self, synchronous: Synchronous, busy_timeout_ms: int) -> sqlite3.Connection:
        path = self.path
        if path.is_dir():
            raise StoreError(f"step log {path} is a folder, expected a file")
        try:
            path.parent.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise StoreError(f"step log folder {path.parent} cannot be made: {exc}") from exc
        if path.exists() and not os.access(path, os.W_OK):
            raise StoreError(f"step log {path} is read-only; open it with readonly=True to read it")
        with store_errors(path, "opening for writing"):
            conn = sqlite3.connect(
                str(path), isolation_level=None, timeout=busy_timeout_ms / 1000.0
            )
            try:
                _check_identity(conn, path)
                mode = str(conn.execute("PRAGMA journal_mode = WAL").fetchone()[0])
                if mode.lower() != "wal":
                    raise StoreError(f"step log {path} cannot use a write-ahead log (got {mode})")
                conn.execute(f"PRAGMA synchronous = {synchronous}")
                log_schema.migrate(conn, refill_derived)
            except BaseException:
                conn.close()
                raise
        return conn

    # ---- lifecycle
    def close(self) -> None:
        self._conn.close()

    def __enter__(self) -> Self:
        return self

    def __exit__(
        self,
        exc_type: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.close()

    @property
    def connection(self) -> sqlite3.Connection:
        """The open connection, for read queries the API does not offer (e.g. station figures)."""
        return self._conn

    # ---- writing
    def _next_seq(self) -> int:
        row = self._conn.execute(
            "SELECT max(coalesce((SELECT seq FROM sqlite_sequence WHERE name = 'events'), 0), "
            "coalesce((SELECT max(seq) FROM events), 0))"
        ).fetchone()
        return int(row[0]) + 1

    def append(self, events: Iterable[Event], recorded_at_s: float) -> int:
        """Save a batch of events (e.g. one sequencer step's) atomically and durably, with the
        rows derived from them; returns the seq of the last one once committed.
        ``recorded_at_s`` is the wall-clock time (epoch seconds) the caller read."""
        if self.readonly:
            raise StoreError(f"step log {self.path} was opened read-only; cannot save events")
        batch = checked_batch(events, recorded_at_s)
        conn = self._conn
        with store_errors(self.path, "saving events"):
            if not batch:
                return self._next_seq() - 1
            with write_transaction(conn):
                first = self._next_seq()
                conn.executemany(
                    f"INSERT INTO events ({_EVENT_COLUMNS}, station_id) "
                    "VALUES (?, ?, ?, ?, ?, ?, ?)",
                    [
                        (
                            first + i,
                            e.t_s,
                            e.kind,
                            e.serial,
                            dump_json(e.to_data()),
                            recorded_at_s,
                            self.station_id,
                        )
                        for i, e in enumerate(batch)
                    ],
                )
                tables = BufferedSqlTables(conn)
                for i, event in enumerate(batch):
                    project(StoredEvent(first + i, recorded_at_s, event), tables)
                tables.flush()
        return first + len(batch) - 1

    def rebuild(self) -> int:
        """Drop the derived tables and fold every event again; returns the event count."""
        if self.readonly:
            raise StoreError(f"step log {self.path} was opened read-only; cannot rebuild")
        conn = self._conn
        with store_errors(self.path, "rebuilding units, steps and alarms"), write_transaction(conn):
            log_schema.recreate_derived(conn)
            count = refill_derived(conn)
        logger.info("rebuilt %s from %d events", self.path, count)
        return count

    # ---- reading events
    def events(
        self, serial: str | None = None, after_seq: int = 0, limit: int | None = None
    ) -> tuple[StoredEvent, ...]:
        """Stored events in log order: all, or one unit's (``serial``), after ``after_seq``."""
        sql = f"SELECT {_EVENT_COLUMNS} FROM events WHERE seq > ?"
        params: list[object] = [after_seq]
        if serial is not None:
            sql += " AND serial = ?"
            params.append(serial)
        sql += " ORDER BY seq LIMIT ?"
        params.append(-1 if limit is None else limit)
        with store_errors(self.path, "reading events"):
            rows = self._conn.execute(sql, params).fetchall()
        return tuple(stored_event_from_sql(row) for row in rows)

    def raw_events(self, after_seq: int, limit: int) -> list[tuple[Any, ...]]:
        """Events as stored (seq, t_s, kind, serial, data JSON text, recorded_at_s, station_id),
        after ``after_seq``: what forwarding ships, byte for byte."""
        with store_errors(self.path, "reading events"):
            return self._conn.execute(
                f"SELECT {_EVENT_COLUMNS}, station_id FROM events WHERE seq > ? ORDER BY seq "
                "LIMIT ?",
                (after_seq, limit),
            ).fetchall()

    def last_seq(self) -> tuple[int, float | None]:
        """The newest event's seq and wall-clock time ((0, None) when the log is empty)."""
        with store_errors(self.path, "reading events"):
            row = self._conn.execute(
                "SELECT seq, recorded_at_s FROM events ORDER BY seq DESC LIMIT 1"
            ).fetchone()
        return (0, None) if row is None else (int(row[0]), float(row[1]))

    def recorded_at(self, seq: int) -> float | None:
        """The wall-clock time of the event with this seq (None when there is none)."""
        with store_errors(self.path, "reading events"):
            row = self._conn.execute(
                "SELECT recorded_at_s FROM events WHERE seq = ?", (seq,)
            ).fetchone()
        return None if row is None else float(row[0])

    def open_unit_events(self) -> tuple[Event, ...]:
        """The events of the open pass of the most recently opened unit still open (empty when
        none is open): what the sequencer needs to continue after a restart."""
        with store_errors(self.path, "finding the open unit"):
            row = self._conn.execute(
                "SELECT serial, open_seq FROM units WHERE open_seq IS NOT NULL "
                "ORDER BY open_seq DESC LIMIT 1"
            ).fetchone()
        if row is None:
            return ()
        serial, open_seq = str(row[0]), int(row[1])
        return tuple(s.event for s in self.events(serial=serial, after_seq=open_seq - 1))

    def open_unit(self) -> UnitProgress | None:
        """The open unit folded from its events, exactly as the sequencer had it."""
        return rebuild_unit(self.open_unit_events())

    # ---- reading derived rows
    def units(self, query: UnitQuery | None = None) -> Page[UnitRow]:
        with store_errors(self.path, "finding units"):
            return queries.find_units(self._conn, query or UnitQuery())

    def unit(self, serial: str) -> UnitRow | None:
        with store_errors(self.path, "reading a unit"):
            return queries.get_unit(self._conn, serial)

    def steps(self, serial: str) -> tuple[StepRow, ...]:
        with store_errors(self.path, "reading steps"):
            return queries.steps_of(self._conn, serial)

    def alarms(self, serial: str) -> tuple[AlarmRow, ...]:
        with store_errors(self.path, "reading alarms"):
            return queries.alarms_of(self._conn, serial)

    def station_alarms(
        self, from_s: float, to_s: float, limit: int = 1000, time_basis: TimeBasis = "recorded_at"
    ) -> tuple[AlarmRow, ...]:
        """All alarms (units' and the station's own) in a time range, oldest first."""
        with store_errors(self.path, "reading alarms"):
            return queries.station_alarms(self._conn, from_s, to_s, limit, time_basis)
