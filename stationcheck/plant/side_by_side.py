"""Per-station figures and trends side by side, over the plant database: the figures from the
(station, day) tallies of :mod:`stationcheck.plant.station_days`, each station's trend from the
shared trend code with the review's station filter."""

from __future__ import annotations

from typing import Any

from stationcheck.plant.review_source import PlantReader, PlantReviewSource, Scope
from stationcheck.quality.json_views import figures_dict, trend_dict, trend_findings
from stationcheck.quality.period import Period
from stationcheck.quality.trends import DEFAULT_POINTS, Trend, position_trend

MAX_TREND_STATIONS = 24


def station_figures_rows(
    source: PlantReviewSource, reader: PlantReader, period: Period
) -> list[dict[str, Any]]:
    """One row of figures per station in the reader's scope (stations without units too),
    computed as the station figures are (the same tallies and definitions)."""
    figures = source.station_figures(reader, period)
    rows = []
    for station in reader.stations():
        sid = station["station_id"]
        fig = figures.get(sid)
        shown = figures_dict(fig) if fig is not None else None  # rounded as the review shows
        times = fig.cycle_times if fig is not None else None
        rows.append(
            {
                "station_id": sid,
                "line": station["line"],
                "plant": station["plant"],
                "units": fig.units if fig else 0,
                "ok": fig.ok if fig else 0,
                "nok": fig.nok if fig else 0,
                "reworked": fig.reworked if fig else 0,
                "first_time_through": fig.first_time_through if fig else 0,
                "ended": fig.ended if fig else 0,
                "open": fig.open if fig else 0,
                "ftt_rate": shown["ftt_rate"] if shown else None,
                "ftt_interval_95": shown["ftt_interval_95"] if shown else None,
                "nok_results": fig.nok_results if fig else 0,
                "retries": fig.retries if fig else 0,
                "cycle_time_median_s": times.median_s if times else None,
                "cycle_time_mean_s": times.mean_s if times else None,
                "forwarded_seq": station["forwarded_seq"],
                "folded_seq": station["folded_seq"],
                "last_recorded_at_s": station["last_recorded_at_s"],
            }
        )
    return rows


def station_trends(
    source: PlantReviewSource,
    station_ids: list[str],
    position: str,
    measure: str,
    period: Period,
    points: int = DEFAULT_POINTS,
) -> list[tuple[str, Trend]]:
    """The position's trend at each station (at most ``MAX_TREND_STATIONS``)."""
    trends = []
    for sid in station_ids[:MAX_TREND_STATIONS]:
        with source.reader(Scope(stations=(sid,))) as reader:
            trends.append(
                (sid, position_trend(reader.connection, position, measure, period, points))
            )
    return trends


def trend_summary(station_id: str, trend: Trend) -> dict[str, Any]:
    body = trend_dict(trend)
    return {
        "station_id": station_id,
        "count": body["count"],
        "centre": body["centre"],
        "sigma": body["sigma"],
        "findings": trend_findings(trend),
    }
