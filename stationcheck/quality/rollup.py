"""Station figures of any period in well under a second on years of data: per-day tallies kept
in memory by the review process, brought up to date from the log before each answer.

The first answer tallies the whole log by UTC day (one pass over the figure indexes). Later
ones look at the events appended since (``seq`` beyond the last seen) and re-tally only the days
those events touch: the start day of each unit they belong to, and the day each new step or
alarm was recorded. A period is then the sum of its whole days from memory plus its two partial
days at the ends, tallied from the log. Every refresh reads one snapshot of the log.
"""

from __future__ import annotations

import logging
import math
import sqlite3
import threading
import time

from stationcheck.quality.figures import (
    DAY_S,
    StationFigures,
    Tally,
    figures_of,
    position_numbers,
    tally_range,
)
from stationcheck.quality.period import OPEN_END_S, OPEN_START_S, Period

logger = logging.getLogger(__name__)


class FigureCache:
    """Per-day tallies of one step log; safe to share between request threads."""

    def __init__(self) -> None:
        self._lock = threading.Lock()
        self._days: dict[int, Tally] = {}
        self._last_seq: int | None = None

    def figures(self, conn: sqlite3.Connection, period: Period) -> StationFigures:
        with self._lock:
            conn.execute("BEGIN")  # one snapshot for the refresh and the answer
            try:
                self._refresh(conn)
                tallies = self._tallies(conn, period)
                return figures_of(period, tallies, position_numbers(conn).get)
            finally:
                conn.execute("COMMIT")

    def _refresh(self, conn: sqlite3.Connection) -> None:
        last = int(conn.execute("SELECT coalesce(max(seq), 0) FROM events").fetchone()[0])
        if self._last_seq is None:
            started = time.perf_counter()
            self._days = tally_range(conn, OPEN_START_S, OPEN_END_S, by_day=True)
            logger.info(
                "tallied %d days of figures in %.2f s",
                len(self._days),
                time.perf_counter() - started,
            )
        elif last > self._last_seq:
            for day in self._touched_days(conn, self._last_seq):
                fresh = tally_range(conn, day * DAY_S, (day + 1) * DAY_S, by_day=True)
                self._days.pop(day, None)
                self._days.update(fresh)
        self._last_seq = last

    @staticmethod
    def _touched_days(conn: sqlite3.Connection, after_seq: int) -> set[int]:
        day = f"CAST({{}} / {DAY_S} AS INTEGER)"
        rows = conn.execute(
            f"SELECT {day.format('u.started_at_s')} FROM units u WHERE u.serial IN "
            "(SELECT serial FROM events WHERE seq > ? AND serial IS NOT NULL) "
            f"UNION SELECT {day.format('recorded_at_s')} FROM steps WHERE seq > ? "
            f"UNION SELECT {day.format('recorded_at_s')} FROM alarms WHERE seq > ?",
            (after_seq, after_seq, after_seq),
        ).fetchall()
        return {int(r[0]) for r in rows}

    def _tallies(self, conn: sqlite3.Connection, period: Period) -> list[Tally]:
        start, end = period.bounds
        first_full = math.ceil(start / DAY_S) if start > OPEN_START_S else None
        after_full = math.floor(end / DAY_S) if end < OPEN_END_S else None
        if first_full is not None and after_full is not None and first_full >= after_full:
            return list(tally_range(conn, start, end).values())  # within one or two days
        tallies = [
            t
            for day, t in self._days.items()
            if (first_full is None or day >= first_full)
            and (after_full is None or day < after_full)
        ]
        if first_full is not None:
            tallies += tally_range(conn, start, first_full * DAY_S).values()
        if after_full is not None:
            tallies += tally_range(conn, after_full * DAY_S, end).values()
        return tallies
