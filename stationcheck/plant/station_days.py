"""Figures per station side by side in well under a second on a million units: the station
log's additive day tallies (:class:`stationcheck.quality.figures.Tally`), kept per (station, UTC
day) for a review scope and brought up to date from each station's fold mark, as the figure
cache of one log is. The grouped queries are PostgreSQL's dialect (``FILTER``)."""

from __future__ import annotations

import math
import threading
from collections import defaultdict
from typing import Any

from stationcheck.plant.review_source import PlantReader, touched_days
from stationcheck.quality.figures import (
    CYCLE_RESOLUTION_S,
    DAY_S,
    UNIT_COUNTS,
    StationFigures,
    Tally,
    figures_of,
    position_numbers,
)
from stationcheck.quality.period import OPEN_END_S, OPEN_START_S, Period

Key = tuple[str, int]  # (station id, UTC day)
_DAY = f"trunc({{}} / {DAY_S})::bigint"


def tally_station_days(
    raw: Any, start: float, end: float, station: str | None = None
) -> dict[Key, Tally]:
    """Tallies of [start, end) per (station, day) over the connection's (scoped) tables."""
    tallies: dict[Key, Tally] = defaultdict(Tally)
    only = "" if station is None else " AND station_id = %(station)s"
    span = {"start": start, "end": end, "station": station, "bin": CYCLE_RESOLUTION_S}
    units = "FROM units WHERE started_at_s >= %(start)s AND started_at_s < %(end)s" + only
    for row in raw.execute(
        f"SELECT station_id, {_DAY.format('started_at_s')}, count(*), "
        "count(*) FILTER (WHERE status = 'OK'), count(*) FILTER (WHERE status = 'NotOK'), "
        "count(*) FILTER (WHERE status = 'NotDecidable'), "
        "count(*) FILTER (WHERE status = 'open'), sum(reworked), sum(first_time_through), "
        f"coalesce(sum(cycle_time_s), 0), min(cycle_time_s), max(cycle_time_s) {units} "
        "GROUP BY 1, 2",
        span,
    ).fetchall():
        tally = tallies[(str(row[0]), int(row[1]))]
        tally.counts.update(dict(zip(UNIT_COUNTS, (int(v) for v in row[2:9]), strict=True)))
        tally.cycle_sum_s += float(row[9])
        tally.cycle_min_s, tally.cycle_max_s = row[10], row[11]
    for sid, day, cycle_bin, n in raw.execute(
        f"SELECT station_id, {_DAY.format('started_at_s')}, "
        f"trunc(cycle_time_s / %(bin)s)::bigint, count(*) {units} "
        "AND cycle_time_s IS NOT NULL GROUP BY 1, 2, 3",
        span,
    ).fetchall():
        tallies[(str(sid), int(day))].cycle_bins[int(cycle_bin)] += int(n)
    for sid, day, position, nok, retries in raw.execute(
        f"SELECT station_id, {_DAY.format('recorded_at_s')}, position, "
        "count(*) FILTER (WHERE result = 'NotOK'), count(*) FILTER (WHERE attempt > 1) "
        "FROM steps WHERE kind = 'fasten' AND (result = 'NotOK' OR attempt > 1) AND "
        f"recorded_at_s >= %(start)s AND recorded_at_s < %(end)s{only} GROUP BY 1, 2, 3",
        span,
    ).fetchall():
        tally = tallies[(str(sid), int(day))]
        tally.nok_by_position[str(position or "?")] += int(nok)
        tally.retries_by_position[str(position or "?")] += int(retries)
    for sid, day, code, n, of_units in raw.execute(
        f"SELECT station_id, {_DAY.format('recorded_at_s')}, code, count(*), count(serial) "
        f"FROM alarms WHERE recorded_at_s >= %(start)s AND recorded_at_s < %(end)s{only} "
        "GROUP BY 1, 2, 3",
        span,
    ).fetchall():
        tally = tallies[(str(sid), int(day))]
        tally.alarms[str(code)] += int(n)
        tally.unit_alarms[str(code)] += int(of_units)
    return dict(tallies)


class StationDayCache:
    """(station, day) tallies of one review scope; safe to share between request threads."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._days: dict[Key, Tally] = {}
        self._marks: dict[str, int] | None = None

    def figures(self, reader: PlantReader, period: Period) -> dict[str, StationFigures]:
        """Each station's figures of the period (stations with no units in it left out)."""
        raw = reader.adapter.raw
        with self._lock:
            self._refresh(raw)
            start, end = period.bounds
            first_full = math.ceil(start / DAY_S) if start > OPEN_START_S else None
            after_full = math.floor(end / DAY_S) if end < OPEN_END_S else None
            parts: list[tuple[Key, Tally]] = []
            if first_full is not None and after_full is not None and first_full >= after_full:
                parts += tally_station_days(raw, start, end).items()
            else:
                parts += [
                    (k, t)
                    for k, t in self._days.items()
                    if (first_full is None or k[1] >= first_full)
                    and (after_full is None or k[1] < after_full)
                ]
                if first_full is not None:
                    parts += tally_station_days(raw, start, first_full * DAY_S).items()
                if after_full is not None:
                    parts += tally_station_days(raw, after_full * DAY_S, end).items()
        per_station: dict[str, list[Tally]] = defaultdict(list)
        for (sid, _), tally in parts:
            per_station[sid].append(tally)
        number_of = position_numbers(reader.connection).get
        return {sid: figures_of(period, tallies, number_of) for sid, tallies in per_station.items()}

    def _refresh(self, raw: Any) -> None:
        marks = {
            str(s): int(m)
            for s, m in raw.execute("SELECT station_id, folded_seq FROM plant.stations").fetchall()
        }
        if self._marks is None:
            self._days = tally_station_days(raw, OPEN_START_S, OPEN_END_S)
        else:
            for station, mark in marks.items():
                old = self._marks.get(station, 0)
                if mark <= old:
                    continue
                for day in touched_days(raw, station, old):
                    self._days.pop((station, day), None)
                    self._days.update(
                        tally_station_days(raw, day * DAY_S, (day + 1) * DAY_S, station)
                    )
        self._marks = marks
