"""The per-day figure cache answers exactly what the direct queries answer, for any period,
also after the station appended units, a late rework of an old unit and alarms."""

from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from review_logs import RECORDED_AT_S, sequencer_events, write_log

from stationcheck.quality.figures import DAY_S, station_figures
from stationcheck.quality.period import Period
from stationcheck.quality.rollup import FigureCache
from stationcheck.store import SqliteStepLog
from stationcheck.store.synthetic import POSITIONS, StationScript

# the scripted log's units lie 0..2,700 s after RECORDED_AT_S (wall clock = 100 x event time)
PERIODS = [
    Period(),
    Period(RECORDED_AT_S + 500.0, None),
    Period(None, RECORDED_AT_S + 1500.0),
    Period(RECORDED_AT_S + 1.0, RECORDED_AT_S + 1200.0),  # inside one day
    Period(RECORDED_AT_S - 3 * DAY_S, RECORDED_AT_S + 3 * DAY_S),  # whole days + ends
    Period(RECORDED_AT_S + 2 * DAY_S, RECORDED_AT_S + 4 * DAY_S),  # nothing there
]


@pytest.fixture
def growing_log(scripted_log: Path, tmp_path: Path) -> Path:
    path = tmp_path / "log.sqlite"
    shutil.copy(scripted_log, path)
    return path


def later_batches() -> list[tuple[object, ...]]:
    """Two days later (wall clock): a new unit, a rework pass of QA-0002 (started on day one),
    a wrong position alarm in a new unit."""
    script = StationScript(start_t_s=2 * DAY_S / 100.0)
    script.unit("QA-0100", {"p6": 1}).frames(None, 500)
    script.unit("QA-0002", {}, ("p3",)).frames(None, 500)
    script.start("QA-0101").frames(None, 100).pick("bin_gasket").pick("bin_cover")
    script.frames(POSITIONS[2], 500).fasten(POSITIONS, {}).verdict("present")
    return sequencer_events(script)  # type: ignore[return-value]


def test_the_cache_answers_like_the_direct_queries_as_the_log_grows(growing_log: Path) -> None:
    cache = FigureCache()
    for round_no in range(2):
        with SqliteStepLog(growing_log, readonly=True) as log:
            conn = log.connection
            for period in PERIODS:
                assert cache.figures(conn, period) == station_figures(conn, period), period
        if round_no == 0:
            write_log(growing_log, later_batches())  # type: ignore[arg-type]
    with SqliteStepLog(growing_log, readonly=True) as log:
        grown = station_figures(log.connection, Period())
    assert grown.units == 7 and grown.reworked == 2  # QA-0002 counts as reworked now
    assert grown.first_time_through == 3  # QA-0001, QA-0004, QA-0101
    assert {a.code: a.count for a in grown.alarms} == {"wrong_position": 2}
