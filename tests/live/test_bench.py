"""The benchmark's live and whole-path figures and the JSON contract of ``bench --json``."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from stationcheck.cli import main

VIDEO = Path(__file__).resolve().parents[2] / "sample_video" / "demo_station.mp4"
HEADLINE_KEYS = ("full_path_fps", "detector_ms_median", "decision_latency_p50_ms",
                 "decision_latency_p99_ms", "rss_mb", "stage_detect_ms_median",
                 "stage_judge_ms_median", "stage_read_ms_median", "live_loop_fps",
                 "live_capacity_fps", "live_headroom_x", "live_taken_share_at_4x")


@pytest.mark.slow
@pytest.mark.skipif(not VIDEO.is_file(), reason="no sample video")
def test_bench_json_has_the_headline_figures(capsys: pytest.CaptureFixture[str]) -> None:
    code = main(["bench", "--section", "detector", "--section", "pipeline", "--section", "live",
                 "--frames", "60", "--threads", "1", "--json"])
    assert code == 0
    figures = json.loads(capsys.readouterr().out)
    for key in HEADLINE_KEYS:
        assert figures[key] > 0, key
    assert figures["decision_latency_p99_ms"] >= figures["decision_latency_p50_ms"]
    # the coil is written after the frame was in hand, so latency covers the detector's time
    assert figures["decision_latency_p50_ms"] >= figures["stage_detect_ms_median"] * 0.5
    assert figures["live_loop_fps"] <= 30.0 * 1.2  # the video plays at its 30 frames/s
    assert figures["live_taken_share_at_4x"] <= 1.0
    # the capacity runs offer up to 8x the camera rate; none can take more than offered
    assert figures["live_capacity_fps"] <= 8 * 30.0 * 1.2
    assert 50 < figures["rss_mb"] < 4000
    rows = {(r["section"], r["name"]) for r in figures["rows"]}
    assert ("live", "decision latency: frame in hand -> coil written") in rows
