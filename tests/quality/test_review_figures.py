"""Station figures from a step log written by the real sequencer, against what the units'
stories say and against the replay's own per-unit summary of the same events."""

from __future__ import annotations

import sqlite3

import pytest
from review_logs import RECORDED_AT_S, figures_agree, summary_of

from stationcheck.core.events import Event
from stationcheck.quality.figures import station_figures
from stationcheck.quality.period import Period, parse_time
from stationcheck.quality.proportion import wilson_interval


def test_figures_of_the_scripted_units(review_conn: sqlite3.Connection) -> None:
    fig = station_figures(review_conn, Period())
    assert (fig.units, fig.ok, fig.nok, fig.aborted, fig.open) == (5, 4, 0, 1, 0)
    assert fig.reworked == 1  # QA-0003
    assert fig.first_time_through == 2  # QA-0001 and QA-0004 (a wrong position is no retry)
    assert fig.ftt_rate == pytest.approx(0.4)
    assert fig.ftt_interval == wilson_interval(2, 5)
    assert [(b.position, b.count) for b in fig.nok_by_position] == [("p5", 2), ("p3", 1)]
    assert [b.cumulative_share for b in fig.nok_by_position] == pytest.approx([2 / 3, 1.0])
    assert [(b.position, b.count) for b in fig.retries_by_position] == [("p3", 1), ("p5", 1)]
    assert [(a.code, a.count, a.of_units) for a in fig.alarms] == [("wrong_position", 1, 1)]


def test_figures_agree_with_the_replay_summary_of_the_same_events(
    review_conn: sqlite3.Connection, scripted_batches: list[tuple[Event, ...]]
) -> None:
    figures_agree(station_figures(review_conn, Period()), summary_of(scripted_batches))


@pytest.mark.parametrize(
    ("from_offset_s", "to_offset_s", "units"),
    [
        (None, None, 5),
        (0.0, 1.0, 1),  # only QA-0001 started in the first second
        (1.0, None, 4),
        (None, 0.0, 0),
        (10_000.0, None, 0),
    ],
)
def test_a_period_counts_the_units_started_in_it(review_conn: sqlite3.Connection,
                                                 from_offset_s: float | None,
                                                 to_offset_s: float | None, units: int) -> None:
    period = Period(None if from_offset_s is None else RECORDED_AT_S + from_offset_s,
                    None if to_offset_s is None else RECORDED_AT_S + to_offset_s)
    fig = station_figures(review_conn, period)
    assert fig.units == units
    if units == 0:
        assert fig.ftt_rate is None and fig.ftt_interval is None and fig.cycle_times.count == 0


def test_the_figure_queries_read_indexes_only(review_conn: sqlite3.Connection) -> None:
    """On a large log a table scan would be slow: every figure query must search an index."""
    from stationcheck.quality import figures

    seen: list[str] = []
    review_conn.set_trace_callback(seen.append)
    try:
        figures.station_figures(review_conn, Period(RECORDED_AT_S, RECORDED_AT_S + 9e5))
    finally:
        review_conn.set_trace_callback(None)
    selects = [sql for sql in seen if sql.lstrip().upper().startswith("SELECT")]
    assert len(selects) >= 4
    for sql in selects:
        plan = [str(r[-1]) for r in review_conn.execute(f"EXPLAIN QUERY PLAN {sql}")]
        assert any(line.startswith("SEARCH") for line in plan), plan
        assert not [line for line in plan if line.startswith("SCAN") and "INDEX" not in line], plan


@pytest.mark.parametrize(
    ("text", "end", "ok"),
    [
        ("1760000000", False, True),
        ("2026-03-01", False, True),
        ("2026-03-01T14:30", False, True),
        ("2026-03-01T14:30+01:00", False, True),
        ("yesterday", False, False),
        ("2026-13-01", False, False),
    ],
)
def test_times_people_type(text: str, end: bool, ok: bool) -> None:
    if not ok:
        with pytest.raises(ValueError, match="not a date/time"):
            parse_time(text, end=end)
        return
    assert parse_time(text) > 1.7e9


def test_a_bare_end_date_includes_that_day() -> None:
    assert parse_time("2026-03-01", end=True) - parse_time("2026-03-01") == pytest.approx(86_400)
    assert parse_time("2026-03-01T00:00+00:00") == 1772323200.0


@pytest.mark.parametrize(("from_s", "to_s"), [(5.0, 5.0), (6.0, 5.0), (float("nan"), None)])
def test_a_period_must_run_forwards(from_s: float, to_s: float | None) -> None:
    with pytest.raises(ValueError):
        Period(from_s, to_s)
