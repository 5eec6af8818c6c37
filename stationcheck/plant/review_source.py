"""The review over the plant database: the same queries as over a station's log, across
stations, with station and line filters.

The review's SQL (:mod:`stationcheck.store.queries`, :mod:`stationcheck.quality`) is written
once. Over PostgreSQL a thin adapter turns SQLite's dialect into PostgreSQL's where the two
differ: ``?`` parameters become ``%s``, SQLite's ``INDEXED BY`` hints are dropped (the planner
picks), ``CAST(x AS INTEGER)`` (which truncates in SQLite, rounds in PostgreSQL) becomes
``trunc(x)::bigint``, a statement that ends in a derived table (``FROM (SELECT ...)``) gets the
alias PostgreSQL 15 requires; ``total(x)`` becomes ``coalesce(sum(x), 0)``, or ``count(*)
FILTER (WHERE x)`` for a condition (native aggregates, many times faster than a SQL-defined
``total`` would be). The filters are
temporary views named like the tables (``units``, ``steps``, ...) over the station's rows in
scope: PostgreSQL looks up temporary relations first, so every query sees only those stations.
"""

from __future__ import annotations

import logging
import re
import sqlite3
import threading
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from types import TracebackType
from typing import Any, Self, TypeVar, cast

from stationcheck.errors import PlantDatabaseError, first_line
from stationcheck.plant.connect import connect, redacted
from stationcheck.plant.plant_schema import require_current
from stationcheck.quality.figures import DAY_S, StationFigures, tally_range
from stationcheck.quality.period import OPEN_END_S, OPEN_START_S, Period
from stationcheck.quality.rollup import FigureCache
from stationcheck.store import queries
from stationcheck.store.log_records import AlarmRow, StepRow, UnitRow

_Cache = TypeVar("_Cache")

logger = logging.getLogger(__name__)

MAX_CACHED_SCOPES = 32
_VIEWED = ("units", "steps", "alarms", "unit_tags", "events")
_INDEXED_BY = re.compile(r"\s+INDEXED BY \w+")
_CAST_INTEGER = re.compile(r"CAST\(([^()]*) AS INTEGER\)")
_TOTAL = re.compile(r"\btotal\(([^()]*)\)")


def _total(match: re.Match[str]) -> str:
    """SQLite's total(): a sum that is 0 over no rows; of a condition, the rows meeting it."""
    inner = match.group(1)
    if "=" in inner:
        return f"count(*) FILTER (WHERE {inner})"
    return f"coalesce(sum({inner}), 0)"


def to_postgres(sql: str) -> str:
    """SQLite's dialect as the review writes it -> PostgreSQL's (see the module docstring)."""
    sql = _INDEXED_BY.sub("", sql)
    sql = _CAST_INTEGER.sub(r"trunc(\1)::bigint", sql)
    sql = _TOTAL.sub(_total, sql)
    if "FROM (SELECT" in sql and sql.rstrip().endswith(")"):
        sql = sql.rstrip() + " AS derived"
    return sql.replace("%", "%%").replace("?", "%s")


@dataclass(frozen=True)
class Scope:
    """Which stations a review answer covers (empty: all)."""

    stations: tuple[str, ...] = ()
    lines: tuple[str, ...] = ()

    @property
    def everything(self) -> bool:
        return not self.stations and not self.lines


class PostgresAdapter:
    """The DB-API calls the review makes on an SQLite connection, on a psycopg connection
    (whose temporary views show the stations of ``scope``)."""

    def __init__(self, conn: Any, scope: Scope) -> None:
        self.raw = conn
        self.scope = scope

    def execute(self, sql: str, params: Sequence[Any] = ()) -> Any:
        if sql.strip().upper() in ("BEGIN", "COMMIT"):
            return self.raw.execute(sql)
        return self.raw.execute(to_postgres(sql), list(params))


class PlantReader:
    """One review request's read-only view of the plant database (use it in a ``with``)."""

    def __init__(self, url: str, password_file: Path | None, scope: Scope) -> None:
        from psycopg import sql

        self.scope = scope
        self._conn = connect(url, password_file, application="stationcheck review")
        try:
            self._conn.execute("SET search_path TO plant")
            if not scope.everything:
                # the scope as a constant list: the planner then uses the station-led indexes
                ids = [
                    str(r[0])
                    for r in self._conn.execute(
                        "SELECT station_id FROM plant.stations WHERE (%s OR station_id = ANY(%s)) "
                        "AND (%s OR line = ANY(%s))",
                        (
                            not scope.stations,
                            list(scope.stations),
                            not scope.lines,
                            list(scope.lines),
                        ),
                    ).fetchall()
                ]
                for table in _VIEWED:
                    self._conn.execute(
                        sql.SQL(
                            "CREATE TEMPORARY VIEW {} AS SELECT * FROM plant.{} WHERE station_id = "
                            "ANY({}::text[])"
                        ).format(sql.Identifier(table), sql.Identifier(table), sql.Literal(ids))
                    )
            self._conn.execute("SET default_transaction_read_only = on")
        except Exception:
            self._conn.close()
            raise
        self.adapter = PostgresAdapter(self._conn, scope)

    @property
    def connection(self) -> sqlite3.Connection:
        """The adapter, typed as the connection the shared review queries take."""
        return cast(sqlite3.Connection, self.adapter)

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

    def unit(self, serial: str) -> UnitRow | None:
        return queries.get_unit(self.connection, serial)

    def steps(self, serial: str) -> tuple[StepRow, ...]:
        return queries.steps_of(self.connection, serial)

    def alarms(self, serial: str) -> tuple[AlarmRow, ...]:
        return queries.alarms_of(self.connection, serial)

    def stations_of(self, serials: Sequence[str]) -> dict[str, list[str]]:
        """serial -> the stations in scope that logged it (traceability across stations)."""
        found: dict[str, list[str]] = {}
        for (serial, _), station in self.unit_stations(serials).items():
            found.setdefault(serial, []).append(station)
        return found

    def unit_stations(self, serials: Sequence[str]) -> dict[tuple[str, float], str]:
        """(serial, first-pass start) -> the station whose unit row it is, in start order."""
        rows = self._conn.execute(
            "SELECT serial, started_at_s, station_id FROM units WHERE serial = ANY(%s) "
            "ORDER BY serial, started_at_s, station_id",
            (list(serials),),
        ).fetchall()
        return {(str(serial), float(start)): str(station) for serial, start, station in rows}

    def stations(self) -> list[dict[str, Any]]:
        """The stations in scope with their line, plant and how far forwarding and the fold
        have got."""
        scope = self.scope
        rows = self._conn.execute(
            "SELECT station_id, line, plant, last_seq, folded_seq, last_recorded_at_s, "
            "extract(epoch FROM last_forward_at)::float8 FROM plant.stations "
            "WHERE (%s OR station_id = ANY(%s)) AND (%s OR line = ANY(%s)) "
            "ORDER BY line, station_id",
            (not scope.stations, list(scope.stations), not scope.lines, list(scope.lines)),
        ).fetchall()
        keys = (
            "station_id",
            "line",
            "plant",
            "forwarded_seq",
            "folded_seq",
            "last_recorded_at_s",
            "last_forward_at_s",
        )
        return [dict(zip(keys, row, strict=True)) for row in rows]


class PlantReviewSource:
    """Where the review reads from: the plant database, one read-only connection per request."""

    def __init__(self, url: str, password_file: Path | None = None) -> None:
        self.url = url
        self.password_file = password_file
        self.name = redacted(url).rsplit("@", 1)[-1]
        self.evidence_root: Path | None = None  # evidence images stay on the station PC
        self._caches: dict[Scope, PlantFigureCache] = {}
        self._station_caches: dict[Scope, Any] = {}
        self._caches_lock = threading.Lock()
        with connect(url, password_file, application="stationcheck review") as conn:
            try:
                require_current(conn)
            except PlantDatabaseError:
                raise
            except Exception as exc:
                raise PlantDatabaseError(f"plant database {self.name}: {first_line(exc)}") from exc

    @property
    def is_plant(self) -> bool:
        return True

    def _cached(
        self, caches: dict[Scope, _Cache], scope: Scope, make: Callable[[], _Cache]
    ) -> _Cache:
        """The scope's cache, made on first use; the oldest goes past ``MAX_CACHED_SCOPES``."""
        with self._caches_lock:
            cache = caches.get(scope)
            if cache is None:
                if len(caches) >= MAX_CACHED_SCOPES:
                    caches.pop(next(iter(caches)))
                cache = caches[scope] = make()
            return cache

    def reader(self, scope: Scope | None = None) -> PlantReader:
        return PlantReader(self.url, self.password_file, scope or Scope())

    def figures(self, conn: sqlite3.Connection, period: Period) -> StationFigures:
        """From per-day tallies of the reader's scope, kept up to date with the fold."""
        scope = cast(PostgresAdapter, conn).scope
        cache = self._cached(self._caches, scope, PlantFigureCache)
        return cache.figures(conn, period)

    def station_figures(self, reader: PlantReader, period: Period) -> dict[str, StationFigures]:
        """Each station's figures of the period, from the scope's (station, day) tallies."""
        from stationcheck.plant.station_days import StationDayCache

        cache = self._cached(self._station_caches, reader.scope, StationDayCache)
        result: dict[str, StationFigures] = cache.figures(reader, period)
        return result


class PlantFigureCache(FigureCache):
    """The station log's per-day figure cache over the plant database: what changed is found
    per station from its ``folded_seq`` instead of one log's seq."""

    def __init__(self) -> None:
        super().__init__()
        self._marks: dict[str, int] | None = None

    def _refresh(self, conn: sqlite3.Connection) -> None:
        raw = cast(PostgresAdapter, conn).raw
        marks = {
            str(s): int(m)
            for s, m in raw.execute("SELECT station_id, folded_seq FROM plant.stations").fetchall()
        }
        if self._marks is None:
            started = time.perf_counter()
            self._days = tally_range(conn, OPEN_START_S, OPEN_END_S, by_day=True)
            logger.info(
                "tallied %d days of plant figures in %.2f s",
                len(self._days),
                time.perf_counter() - started,
            )
        else:
            touched: set[int] = set()
            for station, mark in marks.items():
                if mark > self._marks.get(station, 0):
                    touched |= touched_days(raw, station, self._marks.get(station, 0))
            for day in touched:
                fresh = tally_range(conn, day * DAY_S, (day + 1) * DAY_S, by_day=True)
                self._days.pop(day, None)
                self._days.update(fresh)
        self._marks = marks


def touched_days(raw: Any, station: str, after_seq: int) -> set[int]:
    """UTC days whose tallies events of ``station`` after ``after_seq`` changed."""
    rows = raw.execute(
        f"SELECT trunc(started_at_s / {DAY_S})::bigint FROM plant.units WHERE station_id = %s "
        "AND serial IN (SELECT serial FROM plant.events WHERE station_id = %s AND seq > %s "
        f"AND serial IS NOT NULL) UNION SELECT trunc(recorded_at_s / {DAY_S})::bigint FROM "
        "plant.steps WHERE station_id = %s AND seq > %s UNION SELECT trunc(recorded_at_s / "
        f"{DAY_S})::bigint FROM plant.alarms WHERE station_id = %s AND seq > %s",
        (station, station, after_seq, station, after_seq, station, after_seq),
    ).fetchall()
    return {int(r[0]) for r in rows}
