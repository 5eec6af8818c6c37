"""Read queries over the derived tables: units by filter (one page at a time), a unit's steps and
alarms. Every query is an index range scan; nothing loads a whole table into memory."""

from __future__ import annotations

import json
import sqlite3
from typing import Any

from stationcheck.store.log_records import AlarmRow, Page, StepRow, TimeBasis, UnitQuery, UnitRow
from stationcheck.store.projection import ALARM_TAG, FAILED_POSITION_TAG
from stationcheck.store.sql_tables import (
    ALARM_COLUMNS,
    STEP_COLUMNS,
    UNIT_COLUMNS,
    alarm_from_sql,
    step_from_sql,
    unit_from_sql,
)

# What each result filter means, as a condition on the units table.
RESULT_SQL: dict[str, str] = {
    "OK": "u.status = 'OK'",
    "NOK": "u.status = 'NotOK'",
    "aborted": "u.status = 'NotDecidable'",
    "open": "u.status = 'open'",
    "reworked": "u.reworked = 1",
    "first_time_through": "u.first_time_through = 1",
}
PREFIX_END = "\U0010ffff"  # sorts after any character that can follow the prefix
BROAD_PREFIX_UNITS = 10_000  # a serial prefix matching more walks the time index
_UNIT_SELECT = ", ".join(f"u.{name}" for name in UNIT_COLUMNS)


def time_column(query: UnitQuery) -> str:
    return "started_t_s" if query.time_basis == "t_s" else "started_at_s"


def encode_after(unit: UnitRow, query: UnitQuery) -> str:
    if query.order == "serial":
        return json.dumps([unit.serial])
    key = unit.started_t_s if query.time_basis == "t_s" else unit.started_at_s
    return json.dumps([key, unit.serial])


def decode_after(token: str, query: UnitQuery) -> list[Any]:
    try:
        key = json.loads(token)
    except ValueError as exc:
        raise ValueError(f"UnitQuery.after is not a page token: {token!r}") from exc
    size = 1 if query.order == "serial" else 2
    if not isinstance(key, list) or len(key) != size:
        raise ValueError(
            f"UnitQuery.after is not a page token for order {query.order!r}: {token!r}"
        )
    return key


def tags_of(query: UnitQuery) -> list[str]:
    tags = []
    if query.failed_position is not None:
        tags.append(FAILED_POSITION_TAG + query.failed_position)
    if query.alarm_code is not None:
        tags.append(ALARM_TAG + query.alarm_code)
    return tags


def _unit_filters(query: UnitQuery) -> tuple[list[str], list[Any]]:
    where: list[str] = []
    params: list[Any] = []
    column = f"u.{time_column(query)}"
    if query.serial is not None:
        where.append("u.serial = ?")
        params.append(query.serial)
    if query.serial_prefix:
        where.append("u.serial >= ? AND u.serial < ?")
        params += [query.serial_prefix, query.serial_prefix + PREFIX_END]
    if query.from_s is not None:
        where.append(f"{column} >= ?")
        params.append(query.from_s)
    if query.to_s is not None:
        where.append(f"{column} < ?")
        params.append(query.to_s)
    if query.result is not None:
        where.append(RESULT_SQL[query.result])
    return where, params


def _source(query: UnitQuery) -> tuple[str, str, list[str], list[Any]]:
    """(FROM clause, alias that orders the rows, conditions, parameters). A unit tag (failed
    position, alarm code) drives the query from ``unit_tags``, whose index is in start order."""
    tags = tags_of(query)
    if not tags:
        return "units u", "u", [], []
    where = ["t.tag = ?"] + ["u.serial IN (SELECT serial FROM unit_tags WHERE tag = ?)"] * (
        len(tags) - 1
    )
    return "unit_tags t JOIN units u ON u.serial = t.serial", "t", where, list(tags)


def _order(query: UnitQuery, alias: str) -> tuple[str, str]:
    """(ORDER BY clause, keyset comparison) for the query's order."""
    column = f"{alias}.{time_column(query)}"
    serial = f"{alias}.serial"
    if query.order == "serial":
        return f"{serial} ASC", f"{serial} > ?"
    if query.order == "oldest":
        return f"{column} ASC, {serial} ASC", f"({column}, {serial}) > (?, ?)"
    return f"{column} DESC, {serial} DESC", f"({column}, {serial}) < (?, ?)"


def _where(clauses: list[str]) -> str:
    return f" WHERE {' AND '.join(clauses)}" if clauses else ""


def count_units(conn: sqlite3.Connection, query: UnitQuery, cap: int | None = None) -> int:
    """How many units match; with ``cap``, counting stops there (the answer is then ``cap``),
    which keeps a count on a huge log as quick as a page."""
    source, _, tag_where, tag_params = _source(query)
    where, params = _unit_filters(query)
    if tag_where and not where and len(tag_where) == 1:
        source = "unit_tags t"  # the tag's own index is enough
    if cap is not None:
        sql = f"SELECT count(*) FROM (SELECT 1 FROM {source}{_where(tag_where + where)} LIMIT ?)"
        return int(conn.execute(sql, [*tag_params, *params, max(0, cap)]).fetchone()[0])
    sql = f"SELECT count(*) FROM {source}{_where(tag_where + where)}"
    return int(conn.execute(sql, tag_params + params).fetchone()[0])


def prefix_is_broad(
    conn: sqlite3.Connection, query: UnitQuery, counted: tuple[int, int] | None = None
) -> bool:
    """True when the query's serial prefix matches more than ``BROAD_PREFIX_UNITS`` units: a
    page in time order should then walk the time index (``find_units(time_index=True)``).
    ``counted`` is ``(count_units(conn, query, cap), cap)`` when the caller has it: for a
    query whose only filter is the prefix it answers without counting again."""
    if query.serial_prefix is None:
        return False
    prefix_only = UnitQuery(serial_prefix=query.serial_prefix)
    if (
        counted is not None
        and counted[1] > BROAD_PREFIX_UNITS
        and _unit_filters(query) == _unit_filters(prefix_only)
        and _source(query) == _source(prefix_only)
    ):
        return counted[0] > BROAD_PREFIX_UNITS
    matching = count_units(conn, prefix_only, cap=BROAD_PREFIX_UNITS + 1)
    return matching > BROAD_PREFIX_UNITS


def find_units(
    conn: sqlite3.Connection, query: UnitQuery, time_index: bool = False
) -> Page[UnitRow]:
    """One page of units. ``time_index`` walks the start-time index even with a serial
    prefix: right when the prefix matches most units (the planner would otherwise sort them
    all), wrong when it matches few (the walk would pass most units by)."""
    source, alias, tag_where, tag_params = _source(query)
    if time_index and source == "units u" and query.order != "serial":
        source += (
            f" INDEXED BY {'units_by_start' if query.time_basis == 't_s' else 'units_by_start_at'}"
        )
    where, params = _unit_filters(query)
    order, keyset = _order(query, alias)
    total = count_units(conn, query) if query.count_total else None
    page_where, page_params = tag_where + where, tag_params + params
    if query.after is not None:
        page_where = [*page_where, keyset]
        page_params = [*page_params, *decode_after(query.after, query)]
    sql = (
        f"SELECT {_UNIT_SELECT} FROM {source}{_where(page_where)} ORDER BY {order} LIMIT ? OFFSET ?"
    )
    rows = conn.execute(sql, [*page_params, query.limit + 1, query.offset]).fetchall()
    units = tuple(unit_from_sql(row) for row in rows[: query.limit])
    more = len(rows) > query.limit
    return Page(units, total, encode_after(units[-1], query) if more else None)


def get_unit(conn: sqlite3.Connection, serial: str) -> UnitRow | None:
    row = conn.execute(
        f"SELECT {', '.join(UNIT_COLUMNS)} FROM units WHERE serial = ?", (serial,)
    ).fetchone()
    return unit_from_sql(row) if row is not None else None


def steps_of(conn: sqlite3.Connection, serial: str) -> tuple[StepRow, ...]:
    """A unit's steps in the order they happened (log order, which is time order)."""
    rows = conn.execute(
        f"SELECT {', '.join(STEP_COLUMNS)} FROM steps WHERE serial = ? ORDER BY seq", (serial,)
    ).fetchall()
    return tuple(step_from_sql(row) for row in rows)


def alarms_of(conn: sqlite3.Connection, serial: str) -> tuple[AlarmRow, ...]:
    rows = conn.execute(
        f"SELECT {', '.join(ALARM_COLUMNS)} FROM alarms WHERE serial = ? ORDER BY seq", (serial,)
    ).fetchall()
    return tuple(alarm_from_sql(row) for row in rows)


def station_alarms(
    conn: sqlite3.Connection,
    from_s: float,
    to_s: float,
    limit: int = 1000,
    time_basis: TimeBasis = "recorded_at",
) -> tuple[AlarmRow, ...]:
    """Alarms of every unit and of the station itself in a time range, oldest first."""
    column = "t_s" if time_basis == "t_s" else "recorded_at_s"
    rows = conn.execute(
        f"SELECT {', '.join(ALARM_COLUMNS)} FROM alarms WHERE {column} >= ? AND {column} < ? "
        f"ORDER BY {column}, seq LIMIT ?",
        (from_s, to_s, limit),
    ).fetchall()
    return tuple(alarm_from_sql(row) for row in rows)
