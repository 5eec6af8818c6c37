"""Trends per fastener position and exports, read back from real step logs."""

from __future__ import annotations

import csv
import io
import json
import random
import sqlite3
from pathlib import Path

import pytest
from review_logs import RECORDED_AT_S, sequencer_events, write_log

from stationcheck.quality import unit_export
from stationcheck.quality.period import Period
from stationcheck.quality.review_report import build_report
from stationcheck.quality.trends import fastener_positions, position_trend
from stationcheck.store import SqliteStepLog
from stationcheck.store.log_records import UnitQuery
from stationcheck.store.synthetic import POSITIONS, StationScript

DRIFT_UNITS = 40


@pytest.fixture(scope="module")
def drifting_log(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """40 units (DEMO DATA); p1's torque steady at 10 N·m for 25 units, then creeping up 0.6 N·m
    over the last 15, all inside the 9-11 N·m tolerance; one NOK retry at p1 in unit 5."""
    rng = random.Random(5)
    script = StationScript()
    for n in range(DRIFT_UNITS):
        script.start(f"TR-{n:03d}").frames(None, 100).pick("bin_gasket").pick("bin_cover")
        for zone in POSITIONS:
            if zone == "p1" and n == 5:
                script.tighten(zone, False, 8.2)
            level = 10.0 + (0.04 * (n - 25) if zone == "p1" and n >= 25 else 0.0)
            script.tighten(zone, True, round(rng.gauss(level, 0.05), 3))
        script.verdict("present").frames(None, 300)
    return write_log(tmp_path_factory.mktemp("trend") / "log.sqlite",
                     sequencer_events(script))


def test_positions_come_in_the_stations_numbering(review_conn: sqlite3.Connection) -> None:
    infos = fastener_positions(review_conn)
    assert [i.position for i in infos] == list(POSITIONS)  # cross order p1, p4, p2, p5, p3, p6
    assert [i.number for i in infos] == [1, 2, 3, 4, 5, 6]


def test_a_trend_holds_each_units_deciding_result_in_order(drifting_log: Path) -> None:
    with SqliteStepLog(drifting_log, readonly=True) as log:
        trend = position_trend(log.connection, "p1", "torque")
    assert len(trend.points) == DRIFT_UNITS  # the NOK first attempt of TR-005 is not final
    assert [p.serial for p in trend.points] == [f"TR-{n:03d}" for n in range(DRIFT_UNITS)]
    assert all(9.0 < v < 11.0 for v in trend.values)
    assert trend.tolerance == (9.0, 11.0)
    assert trend.unit == "N·m"


def test_the_drift_at_one_position_is_flagged_and_the_others_are_calm(drifting_log: Path) -> None:
    with SqliteStepLog(drifting_log, readonly=True) as log:
        drifting = position_trend(log.connection, "p1", "torque")
        calm = position_trend(log.connection, "p3", "torque")
    assert drifting.baseline == 20 and drifting.sigma is not None
    assert drifting.first_ewma_signal is not None and drifting.first_ewma_signal >= 25
    assert drifting.cusum is not None and drifting.cusum.first_signal is not None
    assert drifting.cusum.first_signal >= 25
    assert calm.ewma is not None and calm.ewma.signals == ()


@pytest.mark.parametrize(
    ("points", "period_units", "expected", "error"),
    [
        (10, None, 10, None),
        (500, (30, None), 10, None),  # units started from the 31st on
        (500, (None, 0), 0, None),
        (0, None, 0, "points"),
        (6000, None, 0, "points"),
    ],
)
def test_trend_window_and_period(drifting_log: Path, points: int,
                                 period_units: tuple[int | None, int | None] | None,
                                 expected: int, error: str | None) -> None:
    with SqliteStepLog(drifting_log, readonly=True) as log:
        conn = log.connection
        period = Period()
        if period_units is not None:
            starts = [u.started_at_s for u in log.units(UnitQuery(order="oldest",
                                                                   limit=100)).rows]
            lo, hi = period_units
            period = Period(None if lo is None else starts[lo], None if hi is None else starts[hi])
        if error:
            with pytest.raises(ValueError, match=error):
                position_trend(conn, "p1", "torque", period, points)
            return
        trend = position_trend(conn, "p1", "angle", period, points)
    assert len(trend.points) == expected
    if expected:
        assert trend.points[-1].serial == f"TR-{DRIFT_UNITS - 1:03d}"  # always the latest
    if 3 <= expected < 10:  # drawn, with a note that its limits are rough
        assert trend.ewma is not None and "at least 10" in trend.note
    if expected < 3:
        assert trend.ewma is None and "dots only" in trend.note


def test_unit_list_exports_read_back(scripted_log: Path) -> None:
    with SqliteStepLog(scripted_log, readonly=True) as log:
        conn = log.connection
        query = UnitQuery(order="serial")
        text = "".join(unit_export.csv_chunks(
            (unit_export.unit_dict(u) for u in unit_export.iter_units(conn, query, page_units=2)),
            unit_export.UNIT_FIELDS, rows_per_chunk=2))
        data = json.loads("".join(unit_export.units_json(conn, query)))
    rows = list(csv.DictReader(io.StringIO(text)))
    assert [r["serial"] for r in rows] == [f"QA-000{n}" for n in range(1, 6)]
    rework = rows[2]
    assert (rework["status"], rework["reworked"], rework["failed_positions"]) == (
        "OK", "true", "p5")
    assert rework["passes"] == "2" and float(rework["started_at_s"]) >= RECORDED_AT_S
    assert [u["serial"] for u in data["units"]] == [r["serial"] for r in rows]
    assert data["units"][2]["failed_positions"] == ["p5"]


def test_unit_steps_export_shows_the_failed_position_and_its_rework(scripted_log: Path) -> None:
    with SqliteStepLog(scripted_log, readonly=True) as log:
        steps = log.steps("QA-0003")
    rows = list(csv.DictReader(io.StringIO(unit_export.unit_steps_csv(steps))))
    p5 = [(r["pass_no"], r["attempt"], r["result"], r["position_result"]) for r in rows
          if r["position"] == "p5"]
    assert p5 == [("1", "1", "NOK", ""), ("1", "2", "NOK", "NOK"), ("2", "1", "OK", "OK")]
    assert {r["rework"] for r in rows if r["pass_no"] == "2"} == {"true"}


def test_exports_round_to_the_instruments_resolution_and_give_iso_times() -> None:
    """Torque to 0.01 N·m and angle to 0.1 degree (what tightening controllers report: common
    practice, no source); each wall-clock time as ISO 8601 beside its epoch seconds, read back
    with the standard library's own ISO parser."""
    from datetime import datetime

    from stationcheck.store.log_records import AlarmRow, StepRow

    step = StepRow(seq=1, serial="U-1", pass_no=1, step="fasten", kind="fasten",
                   result="NotOK", ended_t_s=12.3456789, recorded_at_s=1_760_000_000.123456,
                   position="p1", torque_nm=4.23456, torque_low_nm=4.5, torque_high_nm=5.5,
                   angle_deg=52.44999, angle_low_deg=15.0, angle_high_deg=45.0)
    alarm = AlarmRow(seq=2, serial="U-1", t_s=12.3456789, recorded_at_s=1_760_000_001.98765,
                     code="check_failed")
    row = next(csv.DictReader(io.StringIO(unit_export.unit_steps_csv([step]))))
    assert (row["torque_nm"], row["angle_deg"], row["ended_t_s"]) == ("4.23", "52.4", "12.346")
    assert row["result"] == "NOK"
    for shown in (unit_export.step_dict(step), unit_export.alarm_dict(alarm)):
        iso = datetime.fromisoformat(shown["recorded_at"])
        assert iso.tzinfo is not None
        assert iso.timestamp() == pytest.approx(shown["recorded_at_s"], abs=1.0)  # to the second
    assert unit_export.alarm_dict(alarm)["recorded_at_s"] == 1_760_000_001.988
    assert all(name.endswith(("_nm", "_deg", "_s", "_at")) for name in unit_export.STEP_FIELDS
               if any(word in name for word in ("torque", "angle", "time", "recorded")))


def test_the_report_is_one_offline_file(drifting_log: Path) -> None:
    with SqliteStepLog(drifting_log, readonly=True) as log:
        html = build_report(log.connection, Period(), "log.sqlite")
    assert html.startswith("<!DOCTYPE html>") and html.rstrip().endswith("</html>")
    assert "<script" not in html and "http://" not in html.replace(
        'xmlns="http://www.w3.org/2000/svg"', "")
    assert html.count("<svg") == 3 + 2 * len(POSITIONS)
    assert "not a safety function" in " ".join(html.split())
    assert "EWMA outside its limits" in html  # p1's drift is named in words


@pytest.mark.parametrize("order", ["newest", "oldest", "serial"])
@pytest.mark.parametrize("result", [None, "OK"])
def test_walking_the_time_index_gives_the_same_pages(review_conn: sqlite3.Connection,
                                                     order: str, result: str | None) -> None:
    """A broad serial prefix makes the list walk the start-time index; the pages must be the
    ones the planner's own choice gives."""
    from stationcheck.store import queries

    def pages(time_index: bool) -> list[list[str]]:
        query = UnitQuery(serial_prefix="QA-", order=order, result=result, limit=2,
                          count_total=False)
        found = []
        while True:
            page = queries.find_units(review_conn, query, time_index=time_index)
            found.append([u.serial for u in page.rows])
            if page.next_after is None:
                return found
            query = UnitQuery(serial_prefix="QA-", order=order, result=result, limit=2,
                              after=page.next_after, count_total=False)

    assert pages(True) == pages(False)
    assert sum(len(p) for p in pages(True)) == (5 if result is None else 4)


@pytest.mark.parametrize(("query", "counts_again"), [
    (UnitQuery(serial_prefix="QA-", order="oldest", limit=2), False),  # the prefix alone
    (UnitQuery(serial_prefix="QA-", result="OK"), True),  # another filter: count the prefix
])
def test_a_prefix_only_list_is_counted_once(review_conn: sqlite3.Connection, query: UnitQuery,
                                            counts_again: bool) -> None:
    from stationcheck.store import queries

    statements: list[str] = []
    review_conn.set_trace_callback(statements.append)
    try:
        count = queries.count_units(review_conn, query, cap=queries.BROAD_PREFIX_UNITS + 1)
        broad = queries.prefix_is_broad(review_conn, query,
                                        counted=(count, queries.BROAD_PREFIX_UNITS + 1))
    finally:
        review_conn.set_trace_callback(None)
    counts = [s for s in statements if "count(*)" in s]
    assert len(counts) == (2 if counts_again else 1)
    assert broad == queries.prefix_is_broad(review_conn, query)  # same answer either way
    assert broad is False  # five QA- units in this log
