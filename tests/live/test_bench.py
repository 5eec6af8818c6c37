from __future__ import annotations

from pathlib import Path

import pytest

from stationcheck.commands.bench import BenchOptions, load_sections

VIDEO = Path(__file__).resolve().parents[2] / "sample_video" / "demo_station.mp4"


@pytest.mark.slow
@pytest.mark.skipif(not VIDEO.is_file(), reason="no sample video")
def test_live_bench_section_reports_latency_and_rate() -> None:
    section = load_sections()["live"]
    rows = section.measure(BenchOptions(frames=30, threads=(1,)))
    figures = rows[0].extra
    for key in ("decision_latency_p50_ms", "decision_latency_p99_ms", "output_latency_p50_ms",
                "live_loop_fps", "live_capacity_fps"):
        assert figures[key] > 0, key
    assert figures["decision_latency_p99_ms"] >= figures["decision_latency_p50_ms"]
    # the frame in hand -> outputs path includes the link-only part
    assert figures["decision_latency_p50_ms"] >= figures["output_latency_p50_ms"]
    assert figures["live_loop_fps"] <= 30.0 * 1.2  # fed at 30 frames/s (first frame at once)
