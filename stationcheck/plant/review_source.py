"""The review over the plant database: the same queries as over a station's log, across
stations, with station and line filters.

The review's SQL (:mod:`stationcheck.store.queries`, :mod:`stationcheck.quality`) is written
once. Over PostgreSQL a thin adapter turns SQLite's dialect into PostgreSQL's where the two
differ: ``?`` parameters become ``%s``, SQLite's ``INDEXED BY`` hints are dropped (the planner
picks), ``CAST(x AS INTEGER)`` (which truncates in SQLite, rounds in PostgreSQL) becomes
``trunc(x)::bigint``, a statement that ends in a derived table (``FROM (SELECT ...)``) gets the
alias PostgreSQL 15 requires; ``total()`` is an aggregate the plant schema defines. The filters are
temporary views named like the tables (``units``, ``steps``, ...) over the station's rows in
scope: PostgreSQL looks up temporary relations first, so every query sees only those stations.
"""

from __future__ import annotations

import re
import sqlite3
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from types import TracebackType
from typing import Any, Self, cast

from stationcheck.errors import PlantDatabaseError, first_line
from stationcheck.plant.connect import connect, redacted
from stationcheck.plant.schema import require_current
from stationcheck.quality.figures import StationFigures, station_figures
from stationcheck.quality.period import Period
from stationcheck.store import queries
from stationcheck.store.records import AlarmRow, StepRow, UnitRow

_VIEWED = ("units", "steps", "alarms", "unit_tags", "events")
_INDEXED_BY = re.compile(r"\s+INDEXED BY \w+")
_CAST_INTEGER = re.compile(r"CAST\(([^()]*) AS INTEGER\)")


def to_postgres(sql: str) -> str:
    """SQLite's dialect as the review writes it -> PostgreSQL's (see the module docstring)."""
    sql = _INDEXED_BY.sub("", sql)
    sql = _CAST_INTEGER.sub(r"trunc(\1)::bigint", sql)
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
    """The DB-API calls the review makes on an SQLite connection, on a psycopg connection."""

    def __init__(self, conn: Any) -> None:
        self.raw = conn

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
                where = sql.SQL(" AND ").join(
                    [sql.SQL("{} = ANY({})").format(sql.Identifier(column), sql.Literal(list(v)))
                     for column, v in (("station_id", scope.stations), ("line", scope.lines))
                     if v])
                for table in _VIEWED:
                    self._conn.execute(sql.SQL(
                        "CREATE TEMPORARY VIEW {} AS SELECT * FROM plant.{} WHERE station_id IN "
                        "(SELECT station_id FROM plant.stations WHERE {})").format(
                        sql.Identifier(table), sql.Identifier(table), where))
            self._conn.execute("SET default_transaction_read_only = on")
        except Exception:
            self._conn.close()
            raise
        self.adapter = PostgresAdapter(self._conn)

    @property
    def connection(self) -> sqlite3.Connection:
        """The adapter, typed as the connection the shared review queries take."""
        return cast(sqlite3.Connection, self.adapter)

    def close(self) -> None:
        self._conn.close()

    def __enter__(self) -> Self:
        return self

    def __exit__(self, exc_type: type[BaseException] | None, exc: BaseException | None,
                 tb: TracebackType | None) -> None:
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
            "ORDER BY serial, started_at_s, station_id", (list(serials),)).fetchall()
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
        keys = ("station_id", "line", "plant", "forwarded_seq", "folded_seq",
                "last_recorded_at_s", "last_forward_at_s")
        return [dict(zip(keys, row, strict=True)) for row in rows]


class PlantReviewSource:
    """Where the review reads from: the plant database, one read-only connection per request."""

    def __init__(self, url: str, password_file: Path | None = None) -> None:
        self.url = url
        self.password_file = password_file
        self.name = redacted(url).rsplit("@", 1)[-1]
        self.evidence_root: Path | None = None  # evidence images stay on the station PC
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

    def reader(self, scope: Scope | None = None) -> PlantReader:
        return PlantReader(self.url, self.password_file, scope or Scope())

    def figures(self, conn: sqlite3.Connection, period: Period) -> StationFigures:
        """Straight from the aggregates (the per-day cache of a station log keys on its seq)."""
        return station_figures(conn, period)
