"""Step-log figures: committed appends per second and review query times on a synthetic log.

Also the ``store`` section of ``stationcheck bench``. Benchmarks measure; they never assert.
"""

from __future__ import annotations

import logging
import statistics
import tempfile
import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING

from stationcheck.core.events import Event
from stationcheck.store.generator import generate_log
from stationcheck.store.log_records import UnitQuery
from stationcheck.store.sqlite_log import SqliteStepLog, Synchronous
from stationcheck.store.synthetic import UnitStream

if TYPE_CHECKING:
    from stationcheck.benches.measuring import BenchOptions, BenchRow

logger = logging.getLogger(__name__)

SECTION_NAME = "store"
SECTION_HELP = "step log: committed appends per second (synchronous=FULL), review query times"
BENCH_UNITS = 20_000
BENCH_APPENDS = 1_000
RECORDED_AT_START_S = 1_700_000_000.0


@dataclass(frozen=True)
class AppendRate:
    commits: int
    events: int
    seconds: float
    commit_ms_median: float
    commit_ms_p99: float

    @property
    def commits_per_s(self) -> float:
        return self.commits / self.seconds

    @property
    def events_per_s(self) -> float:
        return self.events / self.seconds


def percentile(values: list[float], share: float) -> float:
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, round(share * (len(ordered) - 1)))]


def measure_append_rate(
    path: Path, commits: int, synchronous: Synchronous = "FULL", seed: int = 1
) -> AppendRate:
    """Append ``commits`` sequencer-step batches one commit each, as the station does."""
    stream = UnitStream(seed)
    batches: list[tuple[Event, ...]] = []
    while len(batches) < commits:
        batches.extend(stream.next_unit()[1])
    durations_ms: list[float] = []
    events = 0
    with SqliteStepLog(path, synchronous=synchronous) as log:
        started = time.perf_counter()
        for index, batch in enumerate(batches[:commits]):
            t0 = time.perf_counter()
            log.append(batch, RECORDED_AT_START_S + index)
            durations_ms.append((time.perf_counter() - t0) * 1000.0)
            events += len(batch)
        seconds = time.perf_counter() - started
    return AppendRate(
        commits, events, seconds, statistics.median(durations_ms), percentile(durations_ms, 0.99)
    )


def timed_ms(run: Callable[[], object], repeats: int) -> list[float]:
    """Milliseconds of each of ``repeats`` calls of ``run``."""
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        run()
        times.append((time.perf_counter() - t0) * 1000.0)
    return times


@dataclass(frozen=True)
class QueryTiming:
    median_ms: float
    p95_ms: float
    p99_ms: float


def measure_queries(path: Path, repeats: int = 20) -> dict[str, QueryTiming]:
    """Times of the review's queries on an existing log, through a read-only connection."""
    with SqliteStepLog(path, readonly=True) as log:
        newest = log.units(UnitQuery(limit=1, count_total=False)).rows
        if not newest:
            raise ValueError(f"step log {path} has no units to query")
        oldest = log.units(UnitQuery(order="oldest", limit=1, count_total=False)).rows[0]
        middle_s = (newest[0].started_at_s + oldest.started_at_s) / 2.0
        serial = newest[0].serial
        first_page = log.units(UnitQuery(limit=50))
        queries: dict[str, Callable[[], object]] = {
            "unit list page (newest 50 + total)": lambda: log.units(UnitQuery(limit=50)),
            "second page (keyset)": lambda: log.units(
                UnitQuery(limit=50, after=first_page.next_after)
            ),
            "page at offset 10000": lambda: log.units(UnitQuery(limit=50, offset=10_000)),
            "serial exact": lambda: log.unit(serial),
            "serial prefix page": lambda: log.units(UnitQuery(serial_prefix=serial[:-3])),
            "time range page (1 day)": lambda: log.units(
                UnitQuery(from_s=middle_s, to_s=middle_s + 86_400.0)
            ),
            "result NOK page": lambda: log.units(UnitQuery(result="NOK")),
            "result OK page": lambda: log.units(UnitQuery(result="OK")),
            "first-time-through page": lambda: log.units(UnitQuery(result="first_time_through")),
            "reworked page": lambda: log.units(UnitQuery(result="reworked")),
            "failed position page": lambda: log.units(UnitQuery(failed_position="p3")),
            "alarm code page": lambda: log.units(UnitQuery(alarm_code="wrong_position")),
            "steps of a unit": lambda: log.steps(serial),
            "alarms of a unit": lambda: log.alarms(serial),
        }
        results = {}
        for name, run in queries.items():
            run()  # warm the page cache once, as a review page opened twice would
            times = timed_ms(run, repeats)
            results[name] = QueryTiming(
                statistics.median(times), percentile(times, 0.95), percentile(times, 0.99)
            )
    return results


def measure(options: BenchOptions) -> list[BenchRow]:
    from stationcheck.benches.measuring import BenchRow

    rows: list[BenchRow] = []
    with tempfile.TemporaryDirectory(prefix="stationcheck-bench-") as folder:
        for mode in ("FULL", "NORMAL"):
            rate = measure_append_rate(Path(folder) / f"append-{mode}.sqlite", BENCH_APPENDS, mode)
            rows.append(
                BenchRow(
                    SECTION_NAME,
                    f"append commit (synchronous={mode})",
                    rate.commit_ms_median,
                    rate.commit_ms_p99,
                    "ms",
                    extra={"commits_per_s": rate.commits_per_s, "events_per_s": rate.events_per_s},
                )
            )
        log_path = Path(folder) / "review.sqlite"
        t0 = time.perf_counter()
        events = generate_log(log_path, BENCH_UNITS, seed=0)
        seconds = time.perf_counter() - t0
        rows.append(
            BenchRow(
                SECTION_NAME,
                f"generate {BENCH_UNITS} units",
                BENCH_UNITS / seconds,
                None,
                "u/s",
                extra={"events": float(events)},
            )
        )
        for name, timing in measure_queries(log_path).items():
            rows.append(
                BenchRow(
                    SECTION_NAME,
                    f"{name} ({BENCH_UNITS} units)",
                    timing.median_ms,
                    timing.p99_ms,
                    "ms",
                    "p95 < 200 ms at 1M units" if "page" in name else "",
                    extra={"p95_ms": timing.p95_ms},
                )
            )
    return rows


__all__ = ["AppendRate", "QueryTiming", "generate_log", "measure_append_rate", "measure_queries"]
