"""The plant database's schema (PostgreSQL dialect), its versioned migrations and its roles.

Schema ``plant``: ``stations`` (id, line, plant, login role, forwarded and folded high-water
marks), ``events`` (every station's events as the station logged them, keyed by station id and
the station's own seq) and the derived ``units``, ``steps``, ``alarms`` and ``unit_tags``, the
same columns as a station's SQLite log plus ``station_id``, filled by the same projection
(:mod:`stationcheck.plant.fold`). ``plant.schema_version`` counts the migrations applied;
append to :data:`MIGRATIONS`, never edit a released one.

Roles (least privilege): ``stationcheck_station`` may only call ``plant.forward_events`` and
``plant.station_high_water_mark``, SECURITY DEFINER functions that accept a station's events
only from the login role registered for that station; it can read no table. Each station logs
in with its own role, a member of it. ``stationcheck_review`` may read every table and make
temporary views (the review's station and line filters); it writes nothing.
"""

from __future__ import annotations

import logging
from typing import Any

from stationcheck.errors import PlantDatabaseError

logger = logging.getLogger(__name__)

STATION_GROUP = "stationcheck_station"
REVIEW_GROUP = "stationcheck_review"
MAX_ROLE_CHARS = 63  # PostgreSQL's NAMEDATALEN - 1

_V1_TABLES = """
CREATE SCHEMA IF NOT EXISTS plant;
CREATE TABLE plant.stations (
    station_id TEXT COLLATE "C" PRIMARY KEY,
    line TEXT NOT NULL,
    plant TEXT NOT NULL,
    role_name TEXT UNIQUE,
    last_seq BIGINT NOT NULL DEFAULT 0,
    last_recorded_at_s DOUBLE PRECISION,
    last_forward_at TIMESTAMPTZ,
    folded_seq BIGINT NOT NULL DEFAULT 0
);
CREATE TABLE plant.events (
    station_id TEXT COLLATE "C" NOT NULL,  -- forward_events inserts registered stations only
    seq BIGINT NOT NULL,
    t_s DOUBLE PRECISION NOT NULL,
    kind TEXT NOT NULL,
    serial TEXT COLLATE "C",
    data TEXT NOT NULL,
    recorded_at_s DOUBLE PRECISION NOT NULL,
    received_at TIMESTAMPTZ NOT NULL DEFAULT now(),
    PRIMARY KEY (station_id, seq)
);

CREATE TABLE plant.units (
    station_id TEXT COLLATE "C" NOT NULL,
    serial TEXT COLLATE "C" NOT NULL,
    status TEXT NOT NULL,
    passes INTEGER NOT NULL,
    started_t_s DOUBLE PRECISION NOT NULL,
    started_at_s DOUBLE PRECISION NOT NULL,
    open_seq BIGINT,
    current_step TEXT,
    first_result TEXT,
    result TEXT,
    ended_by TEXT,
    released INTEGER NOT NULL,
    reworked INTEGER NOT NULL,
    first_time_through INTEGER NOT NULL,
    ended_t_s DOUBLE PRECISION,
    ended_at_s DOUBLE PRECISION,
    cycle_time_s DOUBLE PRECISION,
    rework_time_s DOUBLE PRECISION NOT NULL,
    retries INTEGER NOT NULL,
    nok_results INTEGER NOT NULL,
    alarm_count INTEGER NOT NULL,
    failed_positions TEXT NOT NULL,
    unfinished_positions TEXT NOT NULL,
    PRIMARY KEY (station_id, serial)
);
CREATE TABLE plant.steps (
    station_id TEXT COLLATE "C" NOT NULL,
    seq BIGINT NOT NULL,
    serial TEXT COLLATE "C" NOT NULL,
    pass_no INTEGER NOT NULL,
    step TEXT NOT NULL,
    kind TEXT NOT NULL,
    position TEXT COLLATE "C",
    position_number INTEGER,
    attempt INTEGER NOT NULL,
    max_attempts INTEGER,
    result TEXT NOT NULL,
    torque_nm DOUBLE PRECISION,
    torque_low_nm DOUBLE PRECISION,
    torque_high_nm DOUBLE PRECISION,
    angle_deg DOUBLE PRECISION,
    angle_low_deg DOUBLE PRECISION,
    angle_high_deg DOUBLE PRECISION,
    within_limits INTEGER,
    sequence BIGINT,
    started_t_s DOUBLE PRECISION,
    ended_t_s DOUBLE PRECISION NOT NULL,
    recorded_at_s DOUBLE PRECISION NOT NULL,
    position_result TEXT,
    evidence_path TEXT,
    detail TEXT NOT NULL,
    PRIMARY KEY (station_id, seq)
);
CREATE TABLE plant.alarms (
    station_id TEXT COLLATE "C" NOT NULL,
    seq BIGINT NOT NULL,
    serial TEXT COLLATE "C",
    t_s DOUBLE PRECISION NOT NULL,
    recorded_at_s DOUBLE PRECISION NOT NULL,
    code TEXT COLLATE "C" NOT NULL,
    severity TEXT NOT NULL,
    subject TEXT NOT NULL,
    message TEXT NOT NULL,
    cleared_t_s DOUBLE PRECISION,
    detail TEXT NOT NULL,
    PRIMARY KEY (station_id, seq)
);
CREATE TABLE plant.unit_tags (
    station_id TEXT COLLATE "C" NOT NULL,
    tag TEXT COLLATE "C" NOT NULL,
    serial TEXT COLLATE "C" NOT NULL,
    started_t_s DOUBLE PRECISION NOT NULL,
    started_at_s DOUBLE PRECISION NOT NULL,
    PRIMARY KEY (station_id, tag, serial)
);
"""

# The review's queries (stationcheck.store.queries, stationcheck.quality) across stations, and
# the same with a station filter in front.
_V1_INDEXES = """
CREATE INDEX units_by_serial ON plant.units(serial);
CREATE INDEX units_by_start_at ON plant.units(started_at_s, serial);
CREATE INDEX units_station_start_at ON plant.units(station_id, started_at_s, serial);
CREATE INDEX units_by_status ON plant.units(status, started_at_s);
CREATE INDEX units_figures ON plant.units(
    started_at_s, status, first_time_through, reworked, cycle_time_s);
CREATE INDEX units_station_figures ON plant.units(
    station_id, started_at_s, status, first_time_through, reworked, cycle_time_s);
CREATE INDEX steps_of_unit ON plant.steps(serial, seq);
CREATE INDEX steps_open ON plant.steps(station_id, serial, pass_no, step, position);
CREATE INDEX steps_nok_at ON plant.steps(recorded_at_s, position)
    WHERE kind = 'fasten' AND result = 'NotOK';
CREATE INDEX steps_retry_at ON plant.steps(recorded_at_s, position)
    WHERE kind = 'fasten' AND attempt > 1;
CREATE INDEX steps_final_at ON plant.steps(position, recorded_at_s)
    WHERE kind = 'fasten' AND position_result IS NOT NULL;
CREATE INDEX steps_station_final_at ON plant.steps(station_id, position, recorded_at_s)
    WHERE kind = 'fasten' AND position_result IS NOT NULL;
CREATE INDEX alarms_of_unit ON plant.alarms(serial, seq) WHERE serial IS NOT NULL;
CREATE INDEX alarms_code_at ON plant.alarms(recorded_at_s, code);
CREATE INDEX alarms_by_code ON plant.alarms(code);
CREATE INDEX alarms_uncleared ON plant.alarms(station_id, code, subject) WHERE cleared_t_s IS NULL;
CREATE INDEX unit_tags_by_start_at ON plant.unit_tags(tag, started_at_s, serial);
"""

# The only way a station's role writes: its own events, after its high-water mark.
_V1_FUNCTIONS = """
CREATE FUNCTION plant.station_high_water_mark(p_station TEXT) RETURNS BIGINT
LANGUAGE plpgsql SECURITY DEFINER SET search_path = pg_catalog, plant AS $$
DECLARE mark BIGINT;
BEGIN
    SELECT last_seq INTO mark FROM plant.stations
        WHERE station_id = p_station AND role_name = session_user;
    IF NOT FOUND THEN
        RAISE EXCEPTION 'role % is not registered for station %', session_user, p_station
            USING ERRCODE = '42501';
    END IF;
    RETURN mark;
END $$;

CREATE FUNCTION plant.forward_events(
    p_station TEXT, p_seq BIGINT[], p_t_s DOUBLE PRECISION[], p_kind TEXT[], p_serial TEXT[],
    p_data TEXT[], p_recorded_at_s DOUBLE PRECISION[]) RETURNS BIGINT
LANGUAGE plpgsql SECURITY DEFINER SET search_path = pg_catalog, plant AS $$
DECLARE mark BIGINT;
BEGIN
    SELECT last_seq INTO mark FROM plant.stations
        WHERE station_id = p_station AND role_name = session_user FOR UPDATE;
    IF NOT FOUND THEN
        RAISE EXCEPTION 'role % may not forward events of station %', session_user, p_station
            USING ERRCODE = '42501';
    END IF;
    INSERT INTO plant.events (station_id, seq, t_s, kind, serial, data, recorded_at_s)
        SELECT p_station, e.seq, e.t_s, e.kind, e.serial, e.data, e.recorded_at_s
        FROM unnest(p_seq, p_t_s, p_kind, p_serial, p_data, p_recorded_at_s)
            AS e(seq, t_s, kind, serial, data, recorded_at_s)
        WHERE e.seq > mark ORDER BY e.seq
        ON CONFLICT (station_id, seq) DO NOTHING;
    UPDATE plant.stations SET
        last_seq = GREATEST(last_seq, (SELECT max(s) FROM unnest(p_seq) s)),
        last_recorded_at_s = CASE WHEN (SELECT max(s) FROM unnest(p_seq) s) > mark
            THEN p_recorded_at_s[array_length(p_recorded_at_s, 1)] ELSE last_recorded_at_s END,
        last_forward_at = now()
        WHERE station_id = p_station RETURNING last_seq INTO mark;
    RETURN mark;
END $$;
REVOKE ALL ON FUNCTION plant.station_high_water_mark(TEXT) FROM PUBLIC;
REVOKE ALL ON FUNCTION plant.forward_events(TEXT, BIGINT[], DOUBLE PRECISION[], TEXT[], TEXT[],
    TEXT[], DOUBLE PRECISION[]) FROM PUBLIC;
"""

MIGRATIONS: tuple[str, ...] = (
    _V1_TABLES + _V1_INDEXES + _V1_FUNCTIONS,  # v1: stations, events, derived tables, functions
)
SCHEMA_VERSION = len(MIGRATIONS)

_GRANTS = f"""
GRANT USAGE ON SCHEMA plant TO {STATION_GROUP}, {REVIEW_GROUP};
GRANT EXECUTE ON FUNCTION plant.station_high_water_mark(TEXT) TO {STATION_GROUP};
GRANT EXECUTE ON FUNCTION plant.forward_events(TEXT, BIGINT[], DOUBLE PRECISION[], TEXT[],
    TEXT[], TEXT[], DOUBLE PRECISION[]) TO {STATION_GROUP};
GRANT SELECT ON ALL TABLES IN SCHEMA plant TO {REVIEW_GROUP};
"""


def schema_version(conn: Any) -> int:
    """Migrations applied (0 on a database without the plant schema)."""
    row = conn.execute("SELECT to_regclass('plant.schema_version') IS NOT NULL").fetchone()
    if not row[0]:
        return 0
    return int(conn.execute("SELECT version FROM plant.schema_version").fetchone()[0])


def _ensure_group(conn: Any, role: str) -> None:
    from psycopg import sql

    exists = conn.execute("SELECT 1 FROM pg_roles WHERE rolname = %s", (role,)).fetchone()
    if exists is None:
        conn.execute(sql.SQL("CREATE ROLE {} NOLOGIN").format(sql.Identifier(role)))


def migrate(conn: Any) -> int:
    """Create or update the plant schema, its functions and the two group roles, in one
    transaction (a failure leaves the previous version). Returns the version reached."""
    from psycopg import sql

    with conn.transaction():
        conn.execute("SELECT pg_advisory_xact_lock(hashtext('stationcheck plant schema'))")
        start = schema_version(conn)
        if start > SCHEMA_VERSION:
            raise PlantDatabaseError(
                f"the plant database has schema version {start}, newer than this stationcheck "
                f"knows ({SCHEMA_VERSION}); use a newer stationcheck"
            )
        for version in range(start, SCHEMA_VERSION):
            conn.execute(MIGRATIONS[version])
            logger.info("plant schema: applied migration %d", version + 1)
        if start == 0:
            conn.execute("CREATE TABLE plant.schema_version (version INTEGER NOT NULL)")
            conn.execute("INSERT INTO plant.schema_version VALUES (0)")
        conn.execute("UPDATE plant.schema_version SET version = %s", (SCHEMA_VERSION,))
        for group in (STATION_GROUP, REVIEW_GROUP):
            _ensure_group(conn, group)
        conn.execute(_GRANTS)
        database = conn.execute("SELECT current_database()").fetchone()[0]
        conn.execute(
            sql.SQL("GRANT CONNECT ON DATABASE {} TO {}, {}").format(
                sql.Identifier(database),
                sql.Identifier(STATION_GROUP),
                sql.Identifier(REVIEW_GROUP),
            )
        )
        conn.execute(
            sql.SQL("GRANT TEMPORARY ON DATABASE {} TO {}").format(
                sql.Identifier(database), sql.Identifier(REVIEW_GROUP)
            )
        )
    return SCHEMA_VERSION


def require_current(conn: Any) -> None:
    version = schema_version(conn)
    if version != SCHEMA_VERSION:
        raise PlantDatabaseError(
            f"the plant database has schema version {version}, this stationcheck needs "
            f"{SCHEMA_VERSION}; run 'stationcheck plant setup' with the database owner's URL"
        )


def default_role(station_id: str) -> str:
    return f"station_{station_id}".lower()


def add_station(
    conn: Any,
    station_id: str,
    line: str,
    plant: str,
    role: str | None = None,
    role_password: str | None = None,
) -> str:
    """Register a station and its own login role (made if missing); returns the role name."""
    from psycopg import sql

    role = role or default_role(station_id)
    if len(role) > MAX_ROLE_CHARS:
        raise PlantDatabaseError(
            f"role name {role!r} is longer than {MAX_ROLE_CHARS} characters;"
            " choose a shorter one with --role"
        )
    with conn.transaction():
        require_current(conn)
        if conn.execute("SELECT 1 FROM pg_roles WHERE rolname = %s", (role,)).fetchone() is None:
            conn.execute(sql.SQL("CREATE ROLE {} LOGIN").format(sql.Identifier(role)))
        conn.execute(
            sql.SQL("GRANT {} TO {}").format(sql.Identifier(STATION_GROUP), sql.Identifier(role))
        )
        if role_password is not None:
            conn.execute(
                sql.SQL("ALTER ROLE {} PASSWORD {}").format(
                    sql.Identifier(role), sql.Literal(role_password)
                )
            )
        conn.execute(
            "INSERT INTO plant.stations (station_id, line, plant, role_name) "
            "VALUES (%s, %s, %s, %s) ON CONFLICT (station_id) DO UPDATE SET line = "
            "excluded.line, plant = excluded.plant, role_name = excluded.role_name",
            (station_id, line, plant, role),
        )
    return role


def add_reviewer(conn: Any, role: str, role_password: str | None = None) -> str:
    """A login role that reads the plant database (the review)."""
    from psycopg import sql

    with conn.transaction():
        require_current(conn)
        if conn.execute("SELECT 1 FROM pg_roles WHERE rolname = %s", (role,)).fetchone() is None:
            conn.execute(sql.SQL("CREATE ROLE {} LOGIN").format(sql.Identifier(role)))
        conn.execute(
            sql.SQL("GRANT {} TO {}").format(sql.Identifier(REVIEW_GROUP), sql.Identifier(role))
        )
        if role_password is not None:
            conn.execute(
                sql.SQL("ALTER ROLE {} PASSWORD {}").format(
                    sql.Identifier(role), sql.Literal(role_password)
                )
            )
    return role
