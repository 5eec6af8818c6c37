"""Per-station figures and trends side by side, over the plant database: one grouped query per
table for the figures (PostgreSQL's dialect: ``FILTER`` and ``percentile_cont``), and each
station's trend from the shared trend code with the review's station filter."""

from __future__ import annotations

from typing import Any

from stationcheck.plant.review_source import PlantReader, PlantReviewSource, Scope
from stationcheck.quality.json_views import trend_dict, trend_findings
from stationcheck.quality.period import Period
from stationcheck.quality.proportion import wilson_interval
from stationcheck.quality.trends import DEFAULT_POINTS, Trend, position_trend

MAX_TREND_STATIONS = 24


def station_figures_rows(reader: PlantReader, period: Period) -> list[dict[str, Any]]:
    """One row of figures per station in the reader's scope (stations without units too)."""
    start, end = period.bounds
    conn = reader.adapter.raw
    units = {str(r[0]): r[1:] for r in conn.execute(
        "SELECT station_id, count(*), count(*) FILTER (WHERE status = 'OK'), "
        "count(*) FILTER (WHERE status = 'NotOK'), count(*) FILTER (WHERE reworked = 1), "
        "count(*) FILTER (WHERE first_time_through = 1), "
        "percentile_cont(0.5) WITHIN GROUP (ORDER BY cycle_time_s), avg(cycle_time_s) "
        "FROM units WHERE started_at_s >= %s AND started_at_s < %s GROUP BY station_id",
        (start, end)).fetchall()}
    steps = {str(r[0]): r[1:] for r in conn.execute(
        "SELECT station_id, count(*) FILTER (WHERE result = 'NotOK'), "
        "count(*) FILTER (WHERE attempt > 1) FROM steps WHERE kind = 'fasten' AND "
        "(result = 'NotOK' OR attempt > 1) AND recorded_at_s >= %s AND recorded_at_s < %s "
        "GROUP BY station_id", (start, end)).fetchall()}
    rows = []
    for station in reader.stations():
        sid = station["station_id"]
        count, ok, nok, reworked, ftt, cycle_median, cycle_mean = units.get(
            sid, (0, 0, 0, 0, 0, None, None))
        nok_results, retries = steps.get(sid, (0, 0))
        interval = wilson_interval(int(ftt), int(count)) if count else None
        rows.append({
            "station_id": sid, "line": station["line"], "plant": station["plant"],
            "units": int(count), "ok": int(ok), "nok": int(nok), "reworked": int(reworked),
            "first_time_through": int(ftt), "ftt_rate": ftt / count if count else None,
            "ftt_interval_95": [interval.low, interval.high] if interval else None,
            "nok_results": int(nok_results), "retries": int(retries),
            "cycle_time_median_s": cycle_median, "cycle_time_mean_s": cycle_mean,
            "forwarded_seq": station["forwarded_seq"], "folded_seq": station["folded_seq"],
            "last_recorded_at_s": station["last_recorded_at_s"],
        })
    return rows


def station_trends(source: PlantReviewSource, station_ids: list[str], position: str,
                   measure: str, period: Period, points: int = DEFAULT_POINTS,
                   ) -> list[tuple[str, Trend]]:
    """The position's trend at each station (at most ``MAX_TREND_STATIONS``)."""
    trends = []
    for sid in station_ids[:MAX_TREND_STATIONS]:
        with source.reader(Scope(stations=(sid,))) as reader:
            trends.append((sid, position_trend(reader.connection, position, measure, period,
                                               points)))
    return trends


def trend_summary(station_id: str, trend: Trend) -> dict[str, Any]:
    body = trend_dict(trend)
    return {"station_id": station_id, "count": body["count"], "centre": body["centre"],
            "sigma": body["sigma"], "findings": trend_findings(trend)}
