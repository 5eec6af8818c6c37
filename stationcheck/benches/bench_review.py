"""``stationcheck bench --section review``: the review on a million-unit step log (DEMO DATA).

The log is generated once by the store's generator and kept (default
``~/.cache/stationcheck/review-bench-1000000u-seed0.sqlite``, ~12 GB, ~10-15 min to make; set
``STATIONCHECK_REVIEW_LOG`` for another place and ``STATIONCHECK_REVIEW_UNITS`` for another
size). Every figure is a real HTTP request to a review server on 127.0.0.1, each opening its
own read-only connection as the screen does. Benchmarks measure; they never assert.
"""

from __future__ import annotations

import http.client
import logging
import os
import statistics
import time
from collections.abc import Callable
from itertools import islice
from pathlib import Path
from typing import TYPE_CHECKING
from urllib.parse import urlencode

from stationcheck.benches.bench_store import percentile, timed_ms

if TYPE_CHECKING:
    from stationcheck.benches.measuring import BenchOptions, BenchRow

logger = logging.getLogger(__name__)

SECTION_NAME = "review"
SECTION_HELP = "review screen on a 1,000,000-unit step log: unit list page, figures, trends"
DEFAULT_UNITS = 1_000_000
REPEATS = 30
TARGET = "p95 < 200 ms"
DAY_S = 86_400.0


def bench_log_path() -> tuple[Path, int]:
    units = int(os.environ.get("STATIONCHECK_REVIEW_UNITS", DEFAULT_UNITS))
    default = Path.home() / ".cache" / "stationcheck" / f"review-bench-{units}u-seed0.sqlite"
    return Path(os.environ.get("STATIONCHECK_REVIEW_LOG", default)), units


def ensure_log(path: Path, units: int) -> float:
    """Generate the log unless it is there (written beside, renamed when complete); bring it
    to the current schema (the review's indexes). Returns the seconds spent."""
    from stationcheck.store.generator import generate_log
    from stationcheck.store.sqlite_log import SqliteStepLog

    started = time.perf_counter()
    if not path.is_file():
        partial = path.with_name(path.name + ".partial")
        for stale in partial.parent.glob(partial.name + "*"):
            stale.unlink()
        partial.parent.mkdir(parents=True, exist_ok=True)
        logger.warning(
            "generating %d synthetic units (demo data) into %s; once, this takes a while",
            units,
            path,
        )
        generate_log(
            partial, units, seed=0, progress=lambda done: logger.info("generated %d units", done)
        )
        partial.rename(path)
    SqliteStepLog(path, synchronous="NORMAL").close()  # migrates an older log once
    return time.perf_counter() - started


class _Client:
    def __init__(self, host: str, port: int) -> None:
        self.host, self.port = host, port

    def get(self, path: str) -> bytes:
        conn = http.client.HTTPConnection(self.host, self.port, timeout=120)
        try:
            conn.request("GET", path)
            response = conn.getresponse()
            body = response.read()
            if response.status != 200:
                raise RuntimeError(f"GET {path}: {response.status} {body[:200]!r}")
            return body
        finally:
            conn.close()


def measure(options: BenchOptions) -> list[BenchRow]:
    import json

    from stationcheck.benches.measuring import BenchRow, resident_memory_mb
    from stationcheck.quality import unit_export
    from stationcheck.store.log_records import UnitQuery
    from stationcheck.store.sqlite_log import SqliteStepLog
    from stationcheck.web.access import AccessRule
    from stationcheck.web.listener import WebServer
    from stationcheck.web.review_screen import ReviewSource, build_review_router

    path, units = bench_log_path()
    prepare_s = ensure_log(path, units)
    rows: list[BenchRow] = [
        BenchRow(
            SECTION_NAME,
            f"log ready ({units:,} units)",
            prepare_s,
            None,
            "s",
            f"{path.stat().st_size / 1e9:.1f} GB, cached",
        )
    ]
    server = WebServer(
        build_review_router(ReviewSource(path)), "127.0.0.1", 0, AccessRule(None)
    ).start()
    host, port = server.server_address[:2]
    client = _Client(str(host), int(port))
    try:
        newest = json.loads(client.get("/api/units?limit=1"))["units"][0]
        last_s = float(newest["started_at_s"])
        page = json.loads(client.get("/api/units?order=serial&limit=50"))
        deep_after = page["next_after"]
        for _ in range(20):  # 21 pages deep by keyset
            deep_after = json.loads(
                client.get(f"/api/units?order=serial&limit=50&after={deep_after}")
            )["next_after"]
        serial = newest["serial"]
        t0 = time.perf_counter()
        client.get("/api/figures")  # the first answer tallies every day of the log once
        rows.append(
            BenchRow(
                SECTION_NAME,
                "station figures, first request (tally all days)",
                (time.perf_counter() - t0) * 1000.0,
                None,
                "ms",
                "once per start",
            )
        )

        def units_page(**params: object) -> Callable[[], object]:
            return lambda: client.get(f"/api/units?{urlencode(params)}")

        def period(days: float | None) -> dict[str, float]:
            return {} if days is None else {"from": last_s - days * DAY_S, "to": last_s + 1}

        cases: dict[str, Callable[[], object]] = {
            "unit list page (newest 50, count)": units_page(),
            "unit list page, serial prefix (100)": units_page(serial=serial[:-2]),
            "unit list page, serial prefix (all)": units_page(serial=serial[:5]),
            "unit list page, result NOK": units_page(result="NOK"),
            "unit list page, result OK": units_page(result="OK"),
            "unit list page, reworked": units_page(result="reworked"),
            "unit list page, failed position p3": units_page(position="p3"),
            "unit list page, alarm wrong_position": units_page(alarm="wrong_position"),
            "unit list page, 1 day": units_page(**period(1)),
            "unit list page 22 (keyset)": units_page(order="serial", after=deep_after),
            "one unit with steps": lambda: client.get(f"/api/unit?serial={serial}"),
            "exact count, all units": lambda: client.get("/api/units/count"),
            "exact count, result OK": lambda: client.get("/api/units/count?result=OK"),
            "station figures, 1 day": lambda: client.get(f"/api/figures?{urlencode(period(1))}"),
            "station figures, 30 days": lambda: client.get(f"/api/figures?{urlencode(period(30))}"),
            "station figures, 365 days": lambda: client.get(
                f"/api/figures?{urlencode(period(365))}"
            ),
            "station figures, all time": lambda: client.get("/api/figures"),
            "trend p3 torque, 500 units": lambda: client.get(
                "/api/trend?position=p3&measure=torque&points=500"
            ),
            "screen info (positions, alarm codes)": lambda: client.get("/api/info"),
        }
        for name, run in cases.items():
            repeats = 5 if "all time" in name or "365" in name or "exact" in name else REPEATS
            first, *warm = timed_ms(run, 1 + repeats)  # the first call, then warm ones
            p95 = percentile(warm, 0.95)
            target = (
                f"p95 {p95:.1f} ms; {TARGET}"
                if "page" in name or "figures" in name
                else f"p95 {p95:.1f} ms"
            )
            rows.append(
                BenchRow(
                    SECTION_NAME,
                    name,
                    statistics.median(warm),
                    percentile(warm, 0.99),
                    "ms",
                    target,
                    extra={"p95_ms": p95, "first_ms": first, "repeats": float(repeats)},
                )
            )
    finally:
        server.close()
    with SqliteStepLog(path, readonly=True) as log:
        t0 = time.perf_counter()
        exported = (
            sum(
                chunk.count("\n")
                for chunk in islice(
                    unit_export.units_csv(log.connection, UnitQuery(order="oldest")), 200
                )
            )
            - 1
        )
        seconds = time.perf_counter() - t0
    rows.append(
        BenchRow(SECTION_NAME, f"CSV export ({exported:,} units)", exported / seconds, None, "u/s")
    )
    peak_mb = resident_memory_mb()[1]
    rows.append(
        BenchRow(
            SECTION_NAME,
            "peak resident memory (bench process)",
            peak_mb,
            None,
            "MB",
            "pages never load whole tables",
            headline={"review_rss_mb": peak_mb},
        )
    )
    return rows
