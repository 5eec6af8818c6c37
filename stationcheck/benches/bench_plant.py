"""``stationcheck bench --section plant``: the plant database on this machine (DEMO DATA).

A throwaway PostgreSQL cluster (Debian's server; fsync off, as for any bench) gets
``STATIONCHECK_PLANT_STATIONS`` stations (default 100) of ``STATIONCHECK_PLANT_UNITS`` generated
units each (default 10,000; the log is generated once and cached under ~/.cache/stationcheck/).
``STATIONCHECK_PLANT_FORWARDED`` of them (default 4) are shipped by real forwarders, one process
each, all at once: that is the events/s figure. One station is folded by the projection (the
fold's events/s); the other stations' derived rows are copies of it with shifted times, made in
SQL, so the review runs over the full unit count without hours of folding. Review figures are
real HTTP requests to a review server on 127.0.0.1. The live part runs the live bench's loop
three times: no forwarding, forwarding, forwarding while the server goes down and comes back.
``STATIONCHECK_PLANT_LIVE=0`` skips it. Benchmarks measure; they never assert.
"""

from __future__ import annotations

import http.client
import logging
import multiprocessing
import os
import tempfile
import threading
import time
from collections.abc import Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from stationcheck.benches.bench_store import percentile, timed_ms

if TYPE_CHECKING:
    from stationcheck.benches.measuring import BenchOptions, BenchRow
    from stationcheck.plant.throwaway import Cluster

logger = logging.getLogger(__name__)

SECTION_NAME = "plant"
SECTION_HELP = (
    "plant database: forwarding events/s, review p95 across stations, live enable "
    "latency with forwarding"
)
REPEATS = 20
REVIEW_TARGET = "p95 < 200 ms"
_TIME_COLUMNS = {"started_at_s", "ended_at_s", "recorded_at_s", "t_s", "cleared_t_s"}


def _setting(name: str, default: int) -> int:
    return int(os.environ.get(f"STATIONCHECK_PLANT_{name}", default))


def _station_log(units: int) -> Path:
    from stationcheck.store.generator import generate_log

    path = Path.home() / ".cache" / "stationcheck" / f"plant-bench-{units}u-seed0.sqlite"
    if not path.is_file():
        partial = path.with_name(path.name + ".partial")
        partial.unlink(missing_ok=True)
        partial.parent.mkdir(parents=True, exist_ok=True)
        generate_log(partial, units, seed=0)
        partial.rename(path)
    return path


def _forward(log: str, station_id: str, url: str) -> None:
    from stationcheck.plant.forwarder import Forwarder

    forwarder = Forwarder(Path(log), station_id, url, batch_events=5000)
    try:
        forwarder.forward_once()
    finally:
        forwarder.close()


def _follow(log: str, station_id: str, url: str, stop: Any) -> None:
    from stationcheck.plant.forwarder import Backoff, Forwarder

    Forwarder(Path(log), station_id, url, poll_s=0.1, backoff=Backoff(first_s=0.2, max_s=1.0)).run(
        stop
    )


def _copy_station(admin: Any, source: str, target: str, shift_s: float) -> None:
    """The derived rows of ``source`` as ``target``'s, times shifted by ``shift_s``."""
    from stationcheck.store.sql_tables import (
        ALARM_COLUMNS,
        STEP_COLUMNS,
        TAG_COLUMNS,
        UNIT_COLUMNS,
    )

    for table, columns in (
        ("units", UNIT_COLUMNS),
        ("steps", STEP_COLUMNS),
        ("alarms", ALARM_COLUMNS),
        ("unit_tags", TAG_COLUMNS),
    ):
        values = ", ".join(f"{c} + {shift_s}" if c in _TIME_COLUMNS else c for c in columns)
        admin.execute(
            f"INSERT INTO plant.{table} (station_id, {', '.join(columns)}) "
            f"SELECT %s, {values} FROM plant.{table} WHERE station_id = %s",
            (target, source),
        )


def _fill(cluster: Cluster, stations: int, units: int, forwarded: int) -> dict[str, float]:
    from stationcheck.plant import connect, plant_schema
    from stationcheck.plant.fold import fold_station

    log = _station_log(units)
    url = cluster.url()
    admin: Any
    with connect.connect(url) as admin:
        plant_schema.migrate(admin)
        names = [f"st-{n:03d}" for n in range(1, stations + 1)]
        roles = {}
        for n, sid in enumerate(names):
            line = f"line-{n % 10 + 1}"
            if n < forwarded:
                roles[sid] = plant_schema.add_station(
                    admin, sid, line, "demo-plant", role_password=cluster.password
                )
            else:
                admin.execute(
                    "INSERT INTO plant.stations (station_id, line, plant) "
                    "VALUES (%s, %s, 'demo-plant')",
                    (sid, line),
                )
        context = multiprocessing.get_context("spawn")
        started = time.perf_counter()
        workers = [
            context.Process(target=_forward, args=(str(log), sid, cluster.url(role)))
            for sid, role in roles.items()
        ]
        for worker in workers:
            worker.start()
        for worker in workers:
            worker.join()
        forward_s = time.perf_counter() - started
        events = int(admin.execute("SELECT count(*) FROM plant.events").fetchone()[0])
        started = time.perf_counter()
        folded = fold_station(admin, names[0])
        fold_s = time.perf_counter() - started
        started = time.perf_counter()
        for n, sid in enumerate(names[1:], start=1):
            _copy_station(admin, names[0], sid, n * 0.37)
        admin.execute("VACUUM ANALYZE")  # as autovacuum would: visibility map, statistics
        copy_s = time.perf_counter() - started
        total_units = int(admin.execute("SELECT count(*) FROM plant.units").fetchone()[0])
    return {
        "events": events,
        "forward_s": forward_s,
        "folded": folded,
        "fold_s": fold_s,
        "copy_s": copy_s,
        "units": total_units,
    }


def _review_rows(cluster: Cluster, stations: int) -> list[BenchRow]:
    from stationcheck.benches.measuring import BenchRow
    from stationcheck.web.access import AccessRule
    from stationcheck.web.listener import WebServer
    from stationcheck.web.review_screen import build_review_router, review_source

    server = WebServer(
        build_review_router(review_source(cluster.url())), "127.0.0.1", 0, AccessRule(None)
    ).start()
    host, port = server.server_address[:2]

    def get(path: str) -> Callable[[], object]:
        def run() -> object:
            conn = http.client.HTTPConnection(str(host), int(port), timeout=120)
            try:
                conn.request("GET", path)
                response = conn.getresponse()
                body = response.read()
                if response.status != 200:
                    raise RuntimeError(f"{path}: {response.status} {body[:200]!r}")
                return body
            finally:
                conn.close()

        return run

    import json

    page = json.loads(get("/api/units?limit=1")())  # type: ignore[arg-type]
    serial = page["units"][0]["serial"]
    one = "st-007" if stations >= 7 else "st-001"
    asks = [
        ("unit list, all stations (newest page)", "/api/units"),
        ("unit list, one line", "/api/units?line=line-3"),
        ("unit list, one station, NOK", f"/api/units?station={one}&result=NOK"),
        ("one unit (+ every station that logged it)", f"/api/unit?serial={serial}"),
        ("station figures, all stations, all time", "/api/figures"),
        ("station figures, one station", f"/api/figures?station={one}"),
        ("figures per station side by side", "/api/stations"),
        ("trend p3 torque, all stations (500 units)", "/api/trend?position=p3"),
        ("trend p3 torque, one station", f"/api/trend?position=p3&station={one}"),
    ]
    rows = []
    try:
        for name, path in asks:
            first_ms = timed_ms(get(path), 1)[0]  # cold: fills a figure cache, if any
            times = timed_ms(get(path), REPEATS + 1)[1:]  # one more warm-up request
            p95 = percentile(times, 0.95)
            rows.append(
                BenchRow(
                    SECTION_NAME,
                    f"review: {name}",
                    float(np.median(times)),
                    percentile(times, 0.99),
                    "ms",
                    REVIEW_TARGET,
                    extra={"p95_ms": p95, "first_ms": first_ms},
                )
            )
    finally:
        server.close()
    return rows


def _live_rows(options: BenchOptions, cluster: Cluster) -> list[BenchRow]:
    from stationcheck.benches.bench_live import DEFAULT_FRAMES, run_on_loopback
    from stationcheck.benches.measuring import BenchRow

    frames = options.frames_or(DEFAULT_FRAMES)
    results: dict[str, np.ndarray[Any, Any]] = {}
    context = multiprocessing.get_context("spawn")
    from stationcheck.plant import plant_schema

    with cluster.connect_admin() as admin:
        urls = {
            sid: cluster.url(
                plant_schema.add_station(
                    admin, sid, "line-0", "demo-plant", role_password=cluster.password
                )
            )
            for sid in ("live-on", "live-down-up")
        }
    for mode in ("off", "on", "down-up"):
        with tempfile.TemporaryDirectory() as folder:
            log = Path(folder) / "live.sqlite"
            stop = context.Event()
            child = None
            if mode != "off":
                sid = "live-on" if mode == "on" else "live-down-up"
                child = context.Process(target=_follow, args=(str(log), sid, urls[sid], stop))
                child.start()
            bouncer = None
            if mode == "down-up":
                bouncer = threading.Thread(target=_bounce, args=(cluster, frames / 30.0))
                bouncer.start()
            try:
                _, loop = run_on_loopback(options, frames, 1.0, log_path=log)
            finally:
                if bouncer is not None:
                    bouncer.join()
                stop.set()
                if child is not None:
                    child.join(30)
            results[mode] = np.array(loop.worker.coil_latency_ms, dtype=float)
    base50, base99 = (float(np.percentile(results["off"], q)) for q in (50, 99))
    rows = []
    for mode, name in (
        ("off", "forwarding off"),
        ("on", "forwarding on"),
        ("down-up", "forwarding on, server down and up"),
    ):
        p50, p99 = (float(np.percentile(results[mode], q)) for q in (50, 99))
        rows.append(
            BenchRow(
                SECTION_NAME,
                f"live decision latency, {name}",
                p50,
                p99,
                "ms",
                "within 10 % of off",
                extra={"p50_vs_off": p50 / base50, "p99_vs_off": p99 / base99},
            )
        )
    return rows


def _bounce(cluster: Cluster, run_s: float) -> None:
    """Stop the server a third into the run, start it again two thirds in."""
    time.sleep(run_s / 3)  # the run's own clock: a timed outage, not a wait for something
    cluster.stop("fast")
    time.sleep(run_s / 3)
    cluster.start()


def measure(options: BenchOptions) -> list[BenchRow]:
    from stationcheck.benches.measuring import BenchRow
    from stationcheck.plant.throwaway import throwaway_cluster

    stations = _setting("STATIONS", 100)
    units = _setting("UNITS", 10_000)
    forwarded = min(stations, _setting("FORWARDED", 4))
    with throwaway_cluster() as cluster:
        os.environ["STATIONCHECK_PG_PASSWORD"] = cluster.password
        filled = _fill(cluster, stations, units, forwarded)
        rows = [
            BenchRow(
                SECTION_NAME,
                f"forwarding: {forwarded} stations at once, events/s",
                filled["events"] / filled["forward_s"],
                None,
                "ev/s",
                ">= 20,000",
                extra={"events": filled["events"], "seconds": filled["forward_s"]},
                headline={"plant_forward_events_per_s": filled["events"] / filled["forward_s"]},
            ),
            BenchRow(
                SECTION_NAME,
                "fold on the server (projection), events/s",
                filled["folded"] / filled["fold_s"],
                None,
                "ev/s",
                extra={"events": filled["folded"], "seconds": filled["fold_s"]},
            ),
            BenchRow(
                SECTION_NAME,
                f"units in the plant database ({stations} stations)",
                filled["units"],
                None,
                "units",
                extra={"copy_s": filled["copy_s"]},
            ),
        ]
        rows += _review_rows(cluster, stations)
        if os.environ.get("STATIONCHECK_PLANT_LIVE", "1") != "0":
            rows += _live_rows(options, cluster)
    return rows
