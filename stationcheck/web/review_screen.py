"""The review screen's routes: units, one unit, station figures, trends, exports and the
report, all read-only against the step log.

Every request opens its own read-only connection (SQLite ``mode=ro``, WAL), so the review is
safe beside a station that is writing, and no request waits for another.
"""

from __future__ import annotations

import logging
import sqlite3
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from stationcheck.quality import unit_export as export
from stationcheck.quality.charts_svg import figure_charts, trend_svg
from stationcheck.quality.figures import StationFigures
from stationcheck.quality.json_views import figures_dict, trend_dict, trend_findings
from stationcheck.quality.period import Period
from stationcheck.quality.report_units import unit_models
from stationcheck.quality.review_report import build_report, log_is_demo
from stationcheck.quality.rollup import FigureCache
from stationcheck.quality.trends import (
    DEFAULT_POINTS,
    MAX_POINTS,
    fastener_positions,
    position_trend,
)
from stationcheck.store import queries
from stationcheck.store.log_records import (
    RESULT_FILTERS,
    UNIT_ORDERS,
    AlarmRow,
    StepRow,
    UnitQuery,
    UnitRow,
)
from stationcheck.store.sqlite_log import SqliteStepLog
from stationcheck.web.app import STATIC_ROOT, add_common_files
from stationcheck.web.server import Request, Response, Router, WebError, resolve_static

log = logging.getLogger(__name__)

REVIEW_STATIC = STATIC_ROOT / "review"
PAGE_UNITS = 50
MAX_PAGE_UNITS = 200
COUNT_CAP = 10_000  # the list page counts this far; /api/units/count counts all


class ReviewSource:
    """Where the review reads from: a step log file, opened read-only per request. The plant
    database's counterpart is :class:`stationcheck.plant.review_source.PlantReviewSource`."""

    is_plant = False

    def __init__(self, path: Path) -> None:
        self.path = path
        self.name = path.name
        self.evidence_root: Path | None = path.resolve().parent
        self.figure_cache = FigureCache()
        self.reader().close()  # a missing file or a non-log fails here, at start-up

    def reader(self, scope: Any = None) -> SqliteStepLog:
        """A fresh read-only connection to the log (use it in a ``with``); one log is one
        station, so a station filter does not apply."""
        return SqliteStepLog(self.path, readonly=True)

    def figures(self, conn: sqlite3.Connection, period: Period) -> StationFigures:
        return self.figure_cache.figures(conn, period)


def review_source(target: str, password_file: Path | None = None) -> Any:
    """A step log file's source, or the plant database's for a ``postgresql://`` URL."""
    if target.startswith(("postgresql://", "postgres://")):
        from stationcheck.plant.review_source import PlantReviewSource

        return PlantReviewSource(target, password_file)
    return ReviewSource(Path(target))


def scope_of(request: Request) -> Any:
    """The station and line filters (``station``, ``line``: comma-separated) of a request."""
    stations, lines = (
        tuple(v for v in (request.query.get(k, "")).split(",") if v.strip())
        for k in ("station", "line")
    )
    if not stations and not lines:
        return None
    from stationcheck.plant.review_source import Scope

    return Scope(stations, lines)


def _float_arg(request: Request, name: str) -> float | None:
    raw = request.query.get(name, "")
    if raw == "":
        return None
    try:
        return float(raw)
    except ValueError as exc:
        raise WebError(400, f"{name} must be a number (epoch seconds), got {raw!r}") from exc


def _text_arg(request: Request, name: str) -> str | None:
    value = request.query.get(name, "").strip()
    return value or None


def period_of(request: Request) -> Period:
    try:
        return Period(_float_arg(request, "from"), _float_arg(request, "to"))
    except ValueError as exc:
        raise WebError(400, str(exc)) from exc


def unit_query(request: Request, limit: int = PAGE_UNITS) -> UnitQuery:
    result, order = _text_arg(request, "result"), _text_arg(request, "order") or "newest"
    if result is not None and result not in RESULT_FILTERS:
        raise WebError(400, f"result must be one of {list(RESULT_FILTERS)}, got {result!r}")
    if order not in UNIT_ORDERS:
        raise WebError(400, f"order must be one of {list(UNIT_ORDERS)}, got {order!r}")
    try:
        return UnitQuery(
            serial_prefix=_text_arg(request, "serial"),
            from_s=_float_arg(request, "from"),
            to_s=_float_arg(request, "to"),
            result=result,
            failed_position=_text_arg(request, "position"),
            alarm_code=_text_arg(request, "alarm"),
            order=order,
            limit=limit,
            after=_text_arg(request, "after"),
            count_total=False,
        )
    except ValueError as exc:
        raise WebError(400, str(exc)) from exc


def _download(chunks: Iterator[str], filename: str, content_type: str) -> Response:
    return Response(
        200,
        b"",
        content_type,
        {"Content-Disposition": f'attachment; filename="{filename}"'},
        stream=(chunk.encode("utf-8") for chunk in chunks),
    )


def one_unit(
    source: Any, request: Request
) -> tuple[UnitRow, tuple[StepRow, ...], tuple[AlarmRow, ...]]:
    """The ``serial`` argument's unit with its steps and alarms; 400/404 when there is none."""
    serial = _text_arg(request, "serial")
    if serial is None:
        raise WebError(400, "serial is missing")
    with source.reader(scope_of(request)) as step_log:
        row = step_log.unit(serial)
        if row is None:
            raise WebError(404, f"no unit with serial {serial!r} in this log")
        return row, step_log.steps(serial), step_log.alarms(serial)


def alarm_codes(conn: sqlite3.Connection) -> list[str]:
    """Every alarm code in the log: one index seek per code."""
    rows = conn.execute(
        "WITH RECURSIVE c(code) AS (SELECT min(code) FROM alarms UNION ALL "
        "SELECT (SELECT min(code) FROM alarms WHERE code > c.code) FROM c "
        "WHERE c.code IS NOT NULL) SELECT code FROM c WHERE code IS NOT NULL"
    ).fetchall()
    return [str(r[0]) for r in rows]


def build_review_router(source: Any) -> Router:
    router = Router(REVIEW_STATIC, name="review")
    add_common_files(router)

    def info(request: Request) -> Response:
        with source.reader(scope_of(request)) as step_log:
            positions = fastener_positions(step_log.connection)
            codes = alarm_codes(step_log.connection)
            stations = step_log.stations() if source.is_plant else None
            demo = log_is_demo(step_log.connection)
        return Response.json(
            {
                "log": source.name,
                "path": str(getattr(source, "path", source.name)),
                "positions": [p.position for p in positions],
                "alarm_codes": codes,
                "results": list(RESULT_FILTERS),
                "orders": list(UNIT_ORDERS),
                "count_cap": COUNT_CAP,
                "stations": stations,
                "demo_data": demo,
            }
        )

    def units(request: Request) -> Response:
        query = unit_query(request, request.int_arg("limit", PAGE_UNITS, 1, MAX_PAGE_UNITS))
        with source.reader(scope_of(request)) as step_log:
            conn = step_log.connection
            count = queries.count_units(conn, query, cap=COUNT_CAP + 1)
            broad = queries.prefix_is_broad(conn, query, counted=(count, COUNT_CAP + 1))
            try:
                page = queries.find_units(conn, query, time_index=broad)
            except ValueError as exc:  # a page token that is not one
                raise WebError(400, str(exc)) from exc
            rows = [export.unit_dict(u) for u in page.rows]
            if source.is_plant:  # which station's row, and every station that logged the unit
                owners = step_log.unit_stations([u.serial for u in page.rows])
                for row in rows:
                    row["station"] = owners.get((row["serial"], row["started_at_s"]))
                    row["stations"] = [
                        s for (serial, _), s in owners.items() if serial == row["serial"]
                    ]
        return Response.json(
            {
                "units": rows,
                "next_after": page.next_after,
                "count": min(count, COUNT_CAP),
                "count_is_exact": count <= COUNT_CAP,
            }
        )

    def units_count(request: Request) -> Response:
        query = unit_query(request)
        with source.reader(scope_of(request)) as step_log:
            return Response.json({"count": queries.count_units(step_log.connection, query)})

    def unit(request: Request) -> Response:
        body = export.unit_detail(*one_unit(source, request))
        with source.reader(scope_of(request)) as step_log:
            body["models"] = unit_models(step_log.connection, body["unit"]["serial"])
        if source.is_plant:  # traceability: every station of the plant that logged it
            with source.reader() as reader:
                body["stations"] = reader.stations_of([body["unit"]["serial"]]).get(
                    body["unit"]["serial"], []
                )
        return Response.json(body)

    def stations(request: Request) -> Response:
        if not source.is_plant:
            raise WebError(
                404,
                "one step log is one station; review the plant database for stations side by side",
            )
        from stationcheck.plant.side_by_side import (
            station_figures_rows,
            station_trends,
            trend_summary,
        )

        period = period_of(request)
        with source.reader(scope_of(request)) as reader:
            rows = station_figures_rows(source, reader, period)
        body: dict[str, Any] = {
            "period": {"from_s": period.from_s, "to_s": period.to_s, "text": period.describe()},
            "stations": rows,
            "trends": [],
        }
        position = _text_arg(request, "position")
        if position is not None:
            measure = _text_arg(request, "measure") or "torque"
            points = request.int_arg("points", DEFAULT_POINTS, 10, MAX_POINTS)
            try:
                trends = station_trends(
                    source, [r["station_id"] for r in rows], position, measure, period, points
                )
            except ValueError as exc:
                raise WebError(400, str(exc)) from exc
            body["trends"] = [
                {**trend_summary(sid, t), "chart": trend_svg(t, 900, 360)} for sid, t in trends
            ]
        return Response.json(body)

    def figures(request: Request) -> Response:
        period = period_of(request)
        with source.reader(scope_of(request)) as step_log:
            fig = source.figures(step_log.connection, period)
        body: dict[str, Any] = figures_dict(fig)
        body["charts"] = figure_charts(fig)
        return Response.json(body)

    def trend(request: Request) -> Response:
        position = _text_arg(request, "position")
        if position is None:
            raise WebError(400, "position is missing")
        measure = _text_arg(request, "measure") or "torque"
        points = request.int_arg("points", DEFAULT_POINTS, 10, MAX_POINTS)
        try:
            with source.reader(scope_of(request)) as step_log:
                result = position_trend(
                    step_log.connection, position, measure, period_of(request), points
                )
        except ValueError as exc:
            raise WebError(400, str(exc)) from exc
        body = trend_dict(result)
        body["findings"] = trend_findings(result)
        body["chart"] = trend_svg(result)
        return Response.json(body)

    def units_export(request: Request, kind: str) -> Response:
        query = unit_query(request)

        def chunks() -> Iterator[str]:
            with source.reader(scope_of(request)) as step_log:
                writer = export.units_csv if kind == "csv" else export.units_json
                yield from writer(step_log.connection, query)

        return _download(
            chunks(),
            f"units.{kind}",
            "text/csv; charset=utf-8" if kind == "csv" else "application/json",
        )

    router.add("GET", "/api/export/units.csv", lambda r: units_export(r, "csv"))
    router.add("GET", "/api/export/units.json", lambda r: units_export(r, "json"))

    def unit_export(request: Request, kind: str) -> Response:
        row, steps, alarms = one_unit(source, request)
        name = f"unit-{''.join(c if c.isalnum() or c in '-_' else '_' for c in row.serial)}"
        if kind == "csv":
            return _download(
                iter([export.unit_steps_csv(steps)]), f"{name}.csv", "text/csv; charset=utf-8"
            )
        text = Response.json(export.unit_detail(row, steps, alarms)).body.decode("utf-8")
        return _download(iter([text]), f"{name}.json", "application/json")

    router.add("GET", "/api/export/unit.csv", lambda r: unit_export(r, "csv"))
    router.add("GET", "/api/export/unit.json", lambda r: unit_export(r, "json"))

    def report(request: Request) -> Response:
        period = period_of(request)
        with source.reader(scope_of(request)) as step_log:
            conn = step_log.connection
            html = build_report(conn, period, source.name, source.figures(conn, period))
        return Response(
            200,
            html.encode("utf-8"),
            "text/html; charset=utf-8",
            {"Content-Disposition": 'attachment; filename="review-report.html"'},
        )

    def evidence(request: Request) -> Response:
        serial = _text_arg(request, "serial")
        seq = request.int_arg("seq", 0, 0, 2**62)
        with source.reader(scope_of(request)) as step_log:
            found = [s for s in step_log.steps(serial or "") if s.seq == seq and s.evidence_path]
        if not found or found[0].evidence_path is None or source.evidence_root is None:
            raise WebError(404, "no evidence image for this step (images stay on the station)")
        file = resolve_static(source.evidence_root, found[0].evidence_path)
        return Response(200, file.read_bytes(), "image/png", {"Cache-Control": "no-cache"})

    for path, handler in (
        ("/api/info", info),
        ("/api/units", units),
        ("/api/units/count", units_count),
        ("/api/unit", unit),
        ("/api/figures", figures),
        ("/api/trend", trend),
        ("/api/report.html", report),
        ("/api/evidence", evidence),
        ("/api/stations", stations),
    ):
        router.add("GET", path, handler)
    return router
