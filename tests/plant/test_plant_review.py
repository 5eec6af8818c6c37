"""The review over the plant database answers as the review over each station's own log does:
the same script outputs for one station (the SQLite review is the reference), station and line
filters, and per-station figures side by side that agree with each station's own figures."""

from __future__ import annotations

import json
import shutil
import sys
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import pytest
from plant_helpers import Station, add_station, admin_connection, forwarder

from stationcheck.cli import main
from stationcheck.plant.fold import fold_all
from stationcheck.plant.throwaway import Cluster

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "web" / "review"))


@dataclass(frozen=True)
class TwoStations:
    a: Station
    b: Station
    log_a: Path
    log_b: Path


@pytest.fixture(scope="module")
def two_stations(pg: Cluster, demo_log: Path,
                 tmp_path_factory: pytest.TempPathFactory) -> TwoStations:
    """Station a (line review-1): 300 generated units (DEMO DATA); station b (line review-2):
    the demo's log. Both forwarded and folded."""
    from stationcheck.store.generator import generate_log

    log_a = tmp_path_factory.mktemp("plant-review") / "a.sqlite"
    generate_log(log_a, 300, seed=3)
    with admin_connection(pg) as admin:
        a = add_station(pg, admin, line="review-1")
        b = add_station(pg, admin, line="review-2")
        for log, station in ((log_a, a), (demo_log, b)):
            fwd = forwarder(log, station)
            try:
                fwd.forward_once()
            finally:
                fwd.close()
        fold_all(admin)
    return TwoStations(a, b, log_a, demo_log)


def review(capsys: pytest.CaptureFixture[str], *args: str) -> Any:
    code = main(["review", *args])
    out = capsys.readouterr()
    assert code == 0, out.err
    return json.loads(out.out)


@pytest.fixture
def reviewer(pg: Cluster, monkeypatch: pytest.MonkeyPatch) -> str:
    from stationcheck.plant import plant_schema

    with admin_connection(pg) as admin:
        plant_schema.add_reviewer(admin, "quality_reviewer", role_password="review-secret")
    monkeypatch.setenv("STATIONCHECK_PG_PASSWORD", "review-secret")
    return pg.url("quality_reviewer")


@pytest.mark.parametrize("what", [
    ("--units", "--json"), ("--units", "--result", "NOK", "--json"),
    ("--units", "--failed-position", "p3", "--order", "oldest", "--json"),
    ("--figures", "--json"), ("--trend", "p3", "--json"), ("--trend", "p1", "--measure", "angle",
                                                          "--json")])
def test_one_station_answers_as_its_own_log(two_stations: TwoStations, reviewer: str,
                                            capsys: pytest.CaptureFixture[str],
                                            what: tuple[str, ...]) -> None:
    mine = review(capsys, str(two_stations.log_a), *what)
    for scope in (("--station", two_stations.a.station_id), ("--line", "review-1")):
        central = review(capsys, reviewer, *scope, *what)
        assert central == mine
    assert mine  # not an empty answer compared with an empty answer


def test_a_unit_and_every_station_that_logged_it(two_stations: TwoStations, reviewer: str,
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    units = review(capsys, str(two_stations.log_b), "--units", "--json")["units"]
    serial = units[0]["serial"]
    mine = review(capsys, str(two_stations.log_b), "--unit", serial, "--json")
    central = review(capsys, reviewer, "--station", two_stations.b.station_id, "--unit", serial,
                     "--json")
    assert central == mine and mine["steps"]


def test_stations_side_by_side(two_stations: TwoStations, reviewer: str,
                               capsys: pytest.CaptureFixture[str]) -> None:
    body = review(capsys, reviewer, "--line", "review-1,review-2", "--stations",
                  "--trend-of", "p3", "--json")
    rows = {r["station_id"]: r for r in body["stations"]}
    assert set(rows) == {two_stations.a.station_id, two_stations.b.station_id}
    for station, log in ((two_stations.a, two_stations.log_a), (two_stations.b,
                                                                two_stations.log_b)):
        own = review(capsys, str(log), "--figures", "--json")
        row = rows[station.station_id]
        assert (row["units"], row["ok"], row["nok"], row["first_time_through"]) == (
            own["units"], own["ok"], own["nok"], own["first_time_through"])
        assert (row["nok_results"], row["retries"]) == (own["nok_results"], own["retries"])
        assert row["ftt_interval_95"] == pytest.approx(own["ftt_interval_95"])
    trends = {t["station_id"]: t for t in body["trends"]}
    assert trends[two_stations.a.station_id]["count"] == review(
        capsys, str(two_stations.log_a), "--trend", "p3", "--json")["count"]


def test_station_filters_need_the_plant_database(two_stations: TwoStations,
                                                 capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["review", str(two_stations.log_a), "--station", "x", "--units"]) == 64
    assert "plant database" in capsys.readouterr().err


@pytest.fixture
def plant_web(two_stations: TwoStations, reviewer: str) -> Iterator[Any]:
    from review_web_helpers import Client

    from stationcheck.web.access import AccessRule
    from stationcheck.web.listener import WebServer
    from stationcheck.web.review_screen import build_review_router, review_source

    server = WebServer(build_review_router(review_source(reviewer)), "127.0.0.1", 0,
                       AccessRule(None)).start()
    try:
        yield Client(server)
    finally:
        server.close()


def test_screen_over_the_plant_database(two_stations: TwoStations, plant_web: Any) -> None:
    from review_web_helpers import serve

    station = two_stations.a.station_id
    for own in serve(two_stations.log_a):
        mine = own.json("/api/units?result=NOK")
        figures = own.json("/api/figures")
    central = plant_web.json(f"/api/units?result=NOK&station={station}")
    assert [u["serial"] for u in central["units"]] == [u["serial"] for u in mine["units"]]
    assert all(u["station"] == station and u["stations"] == [station]
               for u in central["units"])
    assert plant_web.json(f"/api/figures?station={station}")["units"] == figures["units"]
    info = plant_web.json("/api/info?line=review-1")
    assert [s["station_id"] for s in info["stations"]] == [station]
    side = plant_web.json("/api/stations?line=review-1,review-2&position=p3")
    assert len(side["stations"]) == 2 and side["trends"][0]["chart"].startswith("<svg")


def test_figures_follow_the_fold(pg: Cluster, reviewer: str, tmp_path: Path) -> None:
    """The screen's per-day figure cache takes in what the fold adds later: the figures match
    the station's own log (SQLite review) before and after more of it arrives."""
    import sqlite3

    from review_web_helpers import Client, serve

    from stationcheck.store.generator import generate_log
    from stationcheck.store.sqlite_log import SqliteStepLog
    from stationcheck.web.access import AccessRule
    from stationcheck.web.listener import WebServer
    from stationcheck.web.review_screen import build_review_router, review_source

    whole, first_half = tmp_path / "whole.sqlite", tmp_path / "half.sqlite"
    events = generate_log(whole, 200, seed=5)
    shutil.copy(whole, first_half)
    conn = sqlite3.connect(first_half)
    conn.execute("DELETE FROM events WHERE seq > ?", (events // 2,))
    conn.commit()
    conn.close()
    with SqliteStepLog(first_half) as log:
        log.rebuild()
    with admin_connection(pg) as admin:
        station = add_station(pg, admin, line="review-3")
    server = WebServer(build_review_router(review_source(reviewer)), "127.0.0.1", 0,
                       AccessRule(None)).start()
    try:
        plant = Client(server)
        for log in (first_half, whole):
            fwd = forwarder(log, station)
            try:
                fwd.forward_once()
            finally:
                fwd.close()
            with admin_connection(pg) as admin:
                fold_all(admin)
            for own in serve(log):
                expected = own.json("/api/figures")
            central = plant.json(f"/api/figures?station={station.station_id}")
            for key in ("units", "ok", "nok", "first_time_through", "nok_results", "retries",
                        "nok_by_position", "cycle_time"):
                assert central[key] == expected[key], key
    finally:
        server.close()
