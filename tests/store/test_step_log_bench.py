"""The store's benchmark functions run and report figures (they measure; nothing is timed here)."""

from __future__ import annotations

from pathlib import Path

import pytest

from stationcheck.benches import bench_store as bench
from stationcheck.benches.measuring import load_sections
from stationcheck.store import SqliteStepLog
from stationcheck.store.generator import generate_log


def test_append_rate_counts_commits_and_events(tmp_path: Path) -> None:
    rate = bench.measure_append_rate(tmp_path / "log.sqlite", 25, synchronous="NORMAL")
    assert rate.commits == 25 and rate.events >= 25
    assert rate.commits_per_s > 0 and rate.events_per_s >= rate.commits_per_s
    assert 0 < rate.commit_ms_median <= rate.commit_ms_p99
    with SqliteStepLog(tmp_path / "log.sqlite", readonly=True) as log:
        assert len(log.events()) == rate.events


def test_query_timings_cover_the_review_queries(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    generate_log(path, 120, seed=4)
    timings = bench.measure_queries(path, repeats=3)
    assert {"unit list page (newest 50 + total)", "steps of a unit", "failed position page"} <= set(
        timings
    )
    assert all(0 < t.median_ms <= t.p99_ms and t.p95_ms <= t.p99_ms for t in timings.values())


def test_generating_into_a_used_log_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "log.sqlite"
    generate_log(path, 2, seed=1)
    with pytest.raises(ValueError, match="already has events"):
        generate_log(path, 2, seed=1)


def test_store_is_a_bench_section() -> None:
    sections = load_sections()
    assert sections["store"] is bench
    assert bench.SECTION_HELP and callable(bench.measure)
