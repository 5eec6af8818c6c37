"""The review screen's API over HTTP on 127.0.0.1: filters, paging, counts, one unit, figures,
trends, exports, the report; read-only and safe beside a station that writes."""

from __future__ import annotations

import csv
import hashlib
import io
import json
import sqlite3
from pathlib import Path

import pytest
from review_logs import RECORDED_AT_S, figures_agree, summary_figures
from review_web_helpers import Client, DemoRun, serve

from stationcheck.quality.figures import station_figures
from stationcheck.quality.period import Period
from stationcheck.store import SqliteStepLog
from stationcheck.store.synthetic import StationScript


def serials(body: dict[str, object]) -> list[str]:
    return [u["serial"] for u in body["units"]]  # type: ignore[attr-defined,index]


@pytest.mark.parametrize(
    ("query", "expected"),
    [
        ("", ["QA-0005", "QA-0004", "QA-0003", "QA-0002", "QA-0001"]),
        ("?order=oldest", ["QA-0001", "QA-0002", "QA-0003", "QA-0004", "QA-0005"]),
        ("?serial=QA-0003", ["QA-0003"]),
        ("?serial=QA-00&result=reworked", ["QA-0003"]),
        ("?result=first_time_through&order=serial", ["QA-0001", "QA-0004"]),
        ("?result=aborted", ["QA-0005"]),
        ("?position=p5", ["QA-0003"]),
        ("?alarm=wrong_position", ["QA-0004"]),
        (f"?from={RECORDED_AT_S + 1}&to={RECORDED_AT_S + 1200}&order=oldest",
         ["QA-0002", "QA-0003"]),
        ("?serial=XX", []),
    ],
)
def test_units_by_filter_with_a_count(review: Client, query: str, expected: list[str]) -> None:
    body = review.json(f"/api/units{query}")
    assert serials(body) == expected
    assert body["count"] == len(expected) and body["count_is_exact"] is True
    sep = "&" if "?" in query else "?"
    assert review.json(f"/api/units/count{query}")["count"] == len(expected)
    assert review.json(f"/api/units{query}{sep}limit=1")["count"] == len(expected)


def test_pages_follow_one_another_without_repeats(review: Client) -> None:
    seen: list[str] = []
    after = ""
    for _ in range(5):
        body = review.json(f"/api/units?order=serial&limit=2{after}")
        seen += serials(body)
        if body["next_after"] is None:
            break
        after = f"&after={body['next_after']}"
    assert seen == [f"QA-000{n}" for n in range(1, 6)]


@pytest.mark.parametrize(
    ("path", "status", "message"),
    [
        ("/api/units?result=great", 400, "result must be one of"),
        ("/api/units?order=sideways", 400, "order must be one of"),
        ("/api/units?from=monday", 400, "from must be a number"),
        ("/api/units?after=notatoken", 400, "page token"),
        ("/api/unit?serial=NOPE", 404, "no unit with serial"),
        ("/api/unit", 400, "serial is missing"),
        ("/api/figures?from=20&to=10", 400, "must be before"),
        ("/api/trend?position=p1&measure=colour", 400, "measure must be"),
        ("/api/trend", 400, "position is missing"),
        ("/api/export/unit.csv?serial=NOPE", 404, "no unit"),
        ("/api/evidence?serial=QA-0001&seq=1", 404, "no evidence"),
    ],
)
def test_bad_requests_get_one_clear_error(review: Client, path: str, status: int,
                                          message: str) -> None:
    assert message in review.json(path, status)["error"]


def test_one_unit_with_its_failed_position_and_rework(review: Client) -> None:
    body = review.json("/api/unit?serial=QA-0003")
    assert body["unit"]["reworked"] is True and body["unit"]["failed_positions"] == ["p5"]
    p5 = [(s["pass_no"], s["attempt"], s["result"], s["position_result"])
          for s in body["steps"] if s["position"] == "p5"]
    assert p5 == [(1, 1, "NOK", None), (1, 2, "NOK", "NOK"), (2, 1, "OK", "OK")]
    assert [s["seq"] for s in body["steps"]] == sorted(s["seq"] for s in body["steps"])
    assert body["models"] == ["", ""]  # one per pass; this log recorded no model


def test_the_unit_view_names_the_model_of_each_pass(tmp_path: Path) -> None:
    from dataclasses import replace

    from review_logs import scripted_units, sequencer_events, write_log

    from stationcheck.core import event_kinds as ev

    model = hashlib.sha256(b"demo keypoint model").hexdigest()
    batches, passes = [], 0
    for batch in sequencer_events(scripted_units(StationScript())):
        events = []
        for event in batch:
            if isinstance(event, ev.UnitStarted) and event.serial == "QA-0003":
                passes += 1
                event = replace(event, model_sha256=model if passes == 2 else "")
            events.append(event)
        batches.append(tuple(events))
    clients = serve(write_log(tmp_path / "log.sqlite", batches))
    try:
        assert next(clients).json("/api/unit?serial=QA-0003")["models"] == ["", model]
    finally:
        clients.close()


def test_figures_and_trend_carry_their_charts(review: Client) -> None:
    fig = review.json("/api/figures")
    assert (fig["units"], fig["first_time_through"], fig["reworked"]) == (5, 2, 1)
    assert fig["ftt_interval_95"][0] < 0.4 < fig["ftt_interval_95"][1]
    assert all(fig["charts"][k].startswith("<svg") for k in ("nok", "retries", "cycle_time"))
    assert ">p5<" in fig["charts"]["nok"]
    trend = review.json("/api/trend?position=p3&measure=torque&points=10")
    assert trend["count"] == 4 and trend["chart"].startswith("<svg")  # QA-0005 never got there
    assert "at least 10" in trend["findings"][0]


def test_exports_are_downloads_that_read_back(review: Client) -> None:
    status, headers, body = review.get("/api/export/units.csv?result=reworked")
    assert status == 200 and "attachment" in headers["content-disposition"]
    rows = list(csv.DictReader(io.StringIO(body.decode("utf-8"))))
    assert [(r["serial"], r["failed_positions"]) for r in rows] == [("QA-0003", "p5")]
    status, _, body = review.get("/api/export/units.json?order=serial")
    assert [u["serial"] for u in json.loads(body)["units"]][:2] == ["QA-0001", "QA-0002"]
    status, headers, body = review.get("/api/export/unit.json?serial=QA-0003")
    assert headers["content-disposition"] == 'attachment; filename="unit-QA-0003.json"'
    assert len(json.loads(body)["steps"]) == 10 + 2  # 2 picks, 7 tightenings, check; rework 1 + check
    status, headers, body = review.get("/api/report.html")
    assert status == 200 and body.startswith(b"<!DOCTYPE html>")


def test_the_page_and_the_caution_are_served(review: Client) -> None:
    status, _, body = review.get("/")
    assert status == 200 and b"review.js" in body
    assert review.get("/review.js")[0] == 200
    status, _, caution = review.get("/common/caution.html")
    assert b"not a safety" in caution


def test_the_review_sees_new_units_while_the_station_writes(
    scripted_review_log: Path, tmp_path: Path
) -> None:
    """The review only reads (mode=ro); a writer appending meanwhile is neither blocked nor
    missed: the next request shows the new unit."""
    import shutil

    from review_logs import sequencer_events, write_log

    log = tmp_path / "live.sqlite"
    shutil.copy(scripted_review_log, log)
    clients = serve(log)
    client = next(clients)
    try:
        assert client.json("/api/units")["count"] == 5
        script = StationScript(start_t_s=100.0).unit("QA-0100", {})
        write_log(log, sequencer_events(script))
        assert client.json("/api/units")["units"][0]["serial"] == "QA-0100"
        assert client.json("/api/units/count")["count"] == 6
    finally:
        clients.close()
    conn = sqlite3.connect(log)
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    conn.close()


def test_the_demo_log_opens_in_review_and_agrees_with_the_replay_summary(
    demo_run: DemoRun, demo_review: Client
) -> None:
    """The demo's step log, replayed from the sample video (DEMO DATA): the review's station
    figures say what the replay's per-unit summary says."""
    summary = summary_figures(demo_run.report.units)
    with SqliteStepLog(demo_run.log, readonly=True) as log:
        figures_agree(station_figures(log.connection, Period()), summary)
    fig = demo_review.json("/api/figures")
    assert (fig["units"], fig["first_time_through"], fig["reworked"]) == (
        summary.units, summary.first_time_through, summary.reworked)
    assert {b["position"]: b["count"] for b in fig["nok_by_position"]} == {
        "screw_5": 1, "screw_3": 2}
    assert demo_review.json("/api/unit?serial=PC-000104")["unit"]["failed_positions"] == [
        "screw_3"]


def test_evidence_images_are_served_from_beside_the_log_only(tmp_path: Path) -> None:
    from dataclasses import replace

    from review_logs import scripted_units, sequencer_events, write_log

    paths = iter(["evidence/QA-0001_p1.png", "../outside.png"])
    batches = []
    for batch in sequencer_events(scripted_units(StationScript())):
        events = []
        for event in batch:
            if event.kind == "tightening_result" and event.serial == "QA-0001":
                path = next(paths, None)
                if path is not None:
                    event = replace(event, evidence_path=path)
            events.append(event)
        batches.append(tuple(events))
    log = write_log(tmp_path / "logs" / "log.sqlite", batches)
    (tmp_path / "logs" / "evidence").mkdir()
    png = b"\x89PNG\r\n\x1a\n" + b"\x00" * 16
    (tmp_path / "logs" / "evidence" / "QA-0001_p1.png").write_bytes(png)
    (tmp_path / "outside.png").write_bytes(png)
    clients = serve(log)
    client = next(clients)
    try:
        steps = client.json("/api/unit?serial=QA-0001")["steps"]
        with_images = [s for s in steps if s["evidence_path"]]
        assert len(with_images) == 2
        status, headers, body = client.get(
            f"/api/evidence?serial=QA-0001&seq={with_images[0]['seq']}")
        assert (status, headers["content-type"], body) == (200, "image/png", png)
        status, _, _ = client.get(f"/api/evidence?serial=QA-0001&seq={with_images[1]['seq']}")
        assert status == 403
    finally:
        clients.close()
