"""The step log's SQLite schema and its versioned migrations.

``PRAGMA user_version`` is the number of migrations applied; :data:`MIGRATIONS` is the ordered
list. The ``events`` table is the truth and is only ever added to; ``units``, ``steps`` and
``alarms`` are derived from it, so a change to them is a migration that drops, recreates and
refills them from the events (:func:`recreate_derived` + a rebuild).
"""

from __future__ import annotations

import sqlite3
from collections.abc import Callable

from stationcheck.store.write_transaction import write_transaction

APPLICATION_ID = 0x53544C47  # "STLG": marks a file as a stationcheck step log

EVENTS_DDL = """
CREATE TABLE IF NOT EXISTS events (
    seq INTEGER PRIMARY KEY AUTOINCREMENT,
    t_s REAL NOT NULL,
    kind TEXT NOT NULL,
    serial TEXT,
    data TEXT NOT NULL,
    recorded_at_s REAL NOT NULL
);
CREATE INDEX IF NOT EXISTS events_by_serial ON events(serial, seq) WHERE serial IS NOT NULL;
CREATE INDEX IF NOT EXISTS events_station ON events(t_s) WHERE serial IS NULL;
"""

DERIVED_TABLES = ("units", "steps", "alarms", "unit_tags")
# Every unit filter has an index in wall-clock (recorded_at) order, the review's default; the
# events' own t_s order is indexed for plain ranges (replays) and sorted otherwise.

DERIVED_DDL = """
CREATE TABLE units (
    serial TEXT PRIMARY KEY,
    status TEXT NOT NULL,
    passes INTEGER NOT NULL,
    started_t_s REAL NOT NULL,
    started_at_s REAL NOT NULL,
    open_seq INTEGER,
    current_step TEXT,
    first_result TEXT,
    result TEXT,
    ended_by TEXT,
    released INTEGER NOT NULL,
    reworked INTEGER NOT NULL,
    first_time_through INTEGER NOT NULL,
    ended_t_s REAL,
    ended_at_s REAL,
    cycle_time_s REAL,
    rework_time_s REAL NOT NULL,
    retries INTEGER NOT NULL,
    nok_results INTEGER NOT NULL,
    alarm_count INTEGER NOT NULL,
    failed_positions TEXT NOT NULL,
    unfinished_positions TEXT NOT NULL
) WITHOUT ROWID;
CREATE INDEX units_by_start ON units(started_t_s, serial);
CREATE INDEX units_by_start_at ON units(started_at_s, serial);
CREATE INDEX units_by_status ON units(status, started_at_s);
CREATE INDEX units_by_reworked ON units(reworked, started_at_s);
CREATE INDEX units_by_ftt ON units(first_time_through, started_at_s);
CREATE INDEX units_open ON units(open_seq) WHERE open_seq IS NOT NULL;

CREATE TABLE steps (
    seq INTEGER PRIMARY KEY,
    serial TEXT NOT NULL,
    pass_no INTEGER NOT NULL,
    step TEXT NOT NULL,
    kind TEXT NOT NULL,
    position TEXT,
    position_number INTEGER,
    attempt INTEGER NOT NULL,
    max_attempts INTEGER,
    result TEXT NOT NULL,
    torque_nm REAL,
    torque_low_nm REAL,
    torque_high_nm REAL,
    angle_deg REAL,
    angle_low_deg REAL,
    angle_high_deg REAL,
    within_limits INTEGER,
    sequence INTEGER,
    started_t_s REAL,
    ended_t_s REAL NOT NULL,
    recorded_at_s REAL NOT NULL,
    position_result TEXT,
    evidence_path TEXT,
    detail TEXT NOT NULL
);
CREATE INDEX steps_of_unit ON steps(serial, pass_no, step, position);
CREATE INDEX steps_by_position ON steps(position, ended_t_s) WHERE position IS NOT NULL;
CREATE INDEX steps_failed ON steps(position, serial) WHERE position_result = 'NotOK';
CREATE INDEX steps_evidence ON steps(ended_t_s) WHERE evidence_path IS NOT NULL;

CREATE TABLE alarms (
    seq INTEGER PRIMARY KEY,
    serial TEXT,
    t_s REAL NOT NULL,
    recorded_at_s REAL NOT NULL,
    code TEXT NOT NULL,
    severity TEXT NOT NULL,
    subject TEXT NOT NULL,
    message TEXT NOT NULL,
    cleared_t_s REAL,
    detail TEXT NOT NULL
);
CREATE INDEX alarms_of_unit ON alarms(serial, seq) WHERE serial IS NOT NULL;
CREATE INDEX alarms_by_code ON alarms(code, serial);
CREATE INDEX alarms_by_time ON alarms(t_s);
CREATE INDEX alarms_by_time_at ON alarms(recorded_at_s);
CREATE INDEX alarms_uncleared ON alarms(code, subject) WHERE cleared_t_s IS NULL;

CREATE TABLE unit_tags (
    tag TEXT NOT NULL,
    serial TEXT NOT NULL,
    started_t_s REAL NOT NULL,
    started_at_s REAL NOT NULL,
    PRIMARY KEY (tag, serial)
) WITHOUT ROWID;
CREATE INDEX unit_tags_by_start ON unit_tags(tag, started_t_s, serial);
CREATE INDEX unit_tags_by_start_at ON unit_tags(tag, started_at_s, serial);
CREATE INDEX unit_tags_of_unit ON unit_tags(serial);
"""


# Indexes for the review's station figures and trends (wall-clock periods): aggregates read
# only index entries (covering), NOK and retry counts only the few rows that are NOK or retries.
REVIEW_INDEX_DDL = """
CREATE INDEX IF NOT EXISTS units_figures ON units(
    started_at_s, status, first_time_through, reworked, cycle_time_s);
CREATE INDEX IF NOT EXISTS steps_nok_at ON steps(recorded_at_s, position)
    WHERE kind = 'fasten' AND result = 'NotOK';
CREATE INDEX IF NOT EXISTS steps_retry_at ON steps(recorded_at_s, position)
    WHERE kind = 'fasten' AND attempt > 1;
CREATE INDEX IF NOT EXISTS steps_final_at ON steps(position, recorded_at_s)
    WHERE kind = 'fasten' AND position_result IS NOT NULL;
CREATE INDEX IF NOT EXISTS alarms_code_at ON alarms(recorded_at_s, code);
"""


def _run_script(conn: sqlite3.Connection, ddl: str) -> None:
    for statement in ddl.split(";"):
        if statement.strip():
            conn.execute(statement)


def recreate_derived(conn: sqlite3.Connection) -> None:
    """Drop and create the derived tables empty (inside the caller's transaction)."""
    for table in DERIVED_TABLES:
        conn.execute(f"DROP TABLE IF EXISTS {table}")
    _run_script(conn, DERIVED_DDL)
    _run_script(conn, REVIEW_INDEX_DDL)


def _create_events(conn: sqlite3.Connection) -> bool:
    _run_script(conn, EVENTS_DDL)
    return False


def _create_derived(conn: sqlite3.Connection) -> bool:
    recreate_derived(conn)
    return True


def _create_review_indexes(conn: sqlite3.Connection) -> bool:
    _run_script(conn, REVIEW_INDEX_DDL)
    return False


def _add_station_id(conn: sqlite3.Connection) -> bool:
    """Events name the station that logged them; older events keep NULL (the station's own)."""
    conn.execute("ALTER TABLE events ADD COLUMN station_id TEXT")
    return False


# Each migration returns True when the derived tables must be refilled from the events. Append only; never edit a released migration.
MIGRATIONS: tuple[Callable[[sqlite3.Connection], bool], ...] = (
    _create_events,  # v1: the event table alone
    _create_derived,  # v2: units, steps, alarms derived from the events
    _create_review_indexes,  # v3: indexes for the review's figures and trends
    _add_station_id,  # v4: the station id (plant section of the config) with every event
)
SCHEMA_VERSION = len(MIGRATIONS)


def schema_version(conn: sqlite3.Connection) -> int:
    row = conn.execute("PRAGMA user_version").fetchone()
    return int(row[0])


def application_id(conn: sqlite3.Connection) -> int:
    row = conn.execute("PRAGMA application_id").fetchone()
    return int(row[0])


def has_tables(conn: sqlite3.Connection) -> bool:
    row = conn.execute("SELECT count(*) FROM sqlite_schema WHERE type = 'table'").fetchone()
    return int(row[0]) > 0


def migrate(
    conn: sqlite3.Connection,
    refill: Callable[[sqlite3.Connection], object],
    upto: int = SCHEMA_VERSION,
) -> None:
    """Apply the missing migrations up to ``upto`` and, if one asks for it, refill the derived
    tables, all in one transaction with the version bump: a crash leaves the old version."""
    start = schema_version(conn)
    if start >= upto:
        return
    with write_transaction(conn):
        needs_refill = False
        for version in range(start, upto):
            needs_refill = MIGRATIONS[version](conn) or needs_refill
        if needs_refill:
            refill(conn)
        conn.execute(f"PRAGMA application_id = {APPLICATION_ID}")
        conn.execute(f"PRAGMA user_version = {upto}")
