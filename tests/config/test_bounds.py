"""Hard ranges (error) and sane ranges (warning) of every timing and threshold, with reasons.

The ranges are common practice for a 25-60 frames/s camera on a handheld tool (no source); what
these tests pin is that every path reports the same rule and that the values that once let a
station enable the tool out of view are refused.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest

from stationcheck.config import CheckResult
from stationcheck.config.bounds import BOUNDS
from stationcheck.config.schema import ThresholdsSection
from stationcheck.errors import ConfigError

Check = Callable[[Any], CheckResult]


@pytest.mark.parametrize(("changes", "expected"), [
    pytest.param([("thresholds.lost_track_grace_ms", 1.0e12)], [
        ("error", "thresholds.lost_track_grace_ms",
         "above the allowed 1000 ms: the tool stays enabled this long while the tip is out")],
        id="huge grace"),
    pytest.param([("plc", {"timeout_ms": 6.0e8})], [
        ("error", "plc.timeout_ms", "above the allowed 2000 ms")], id="huge link timeout"),
    pytest.param([("model", {"min_score": 0.0})], [
        ("error", "model.min_score", "below the allowed 0.05")], id="score 0"),
    pytest.param([("thresholds.max_run_ms", 20000.0)], [
        ("warning", "thresholds.max_run_ms", "above the usual 10000 ms: a stuck")],
        id="long run limit warns"),
    pytest.param([("thresholds.max_run_ms", 50.0)], [
        ("error", "thresholds.max_run_ms", "below the allowed 100 ms")], id="run limit too short"),
    pytest.param([("steps[1].max_run_ms", 120000.0)], [
        ("error", "steps[1].max_run_ms", "above the allowed 60000 ms")],
        id="step run limit too long"),
    pytest.param([("steps[1].max_run_ms", 3000.0), ("thresholds.max_run_ms", 8000.0)], [],
                 id="step override in range"),
    pytest.param([("thresholds.lost_track_grace_ms", 800.0)], [
        ("warning", "thresholds.lost_track_grace_ms", "above the usual 500 ms")],
        id="long grace warns"),
    pytest.param([("thresholds.stale_frame_ms", 5000.0)], [
        ("error", "thresholds.stale_frame_ms", "on a stopped or frozen camera")],
        id="huge stale time"),
    pytest.param([("judgements", {"camera_shift": {"interval_ms": 5000.0}})], [
        ("warning", "judgements.camera_shift.interval_ms", "above the usual 1000 ms")],
        id="slow camera-shift checks warn"),
])
def test_bounds_report_exactly_these_findings(
    check_changes: Check, assert_findings: Callable[..., None], changes: Any, expected: Any,
) -> None:
    assert_findings(check_changes(changes), expected)


def test_every_threshold_has_a_bound_with_reasons() -> None:
    for name in ThresholdsSection.model_fields:
        bound = BOUNDS[f"thresholds.{name}"]
        assert bound.too_high, name
    for key, bound in BOUNDS.items():
        assert bound.low <= bound.sane_low <= bound.sane_high <= bound.high, key


def test_run_refuses_what_check_refuses(
    write_yaml: Callable[..., Path], base_config: Callable[[], dict[str, Any]],
) -> None:
    """``run`` loads its config through the same check: one clear line naming the finding."""
    from stationcheck.config import load_config

    data = base_config()
    data["thresholds"]["lost_track_grace_ms"] = 1.0e12
    with pytest.raises(ConfigError, match=r"thresholds\.lost_track_grace_ms: 1e\+12 ms is above"):
        load_config(write_yaml(data))


def test_setup_screen_findings_carry_the_same_rule(
    tmp_path: Path, base_config: Callable[[], dict[str, Any]],
) -> None:
    from stationcheck.web.setup.checking import check_for_page

    data = base_config()
    data["thresholds"]["dwell_ms"] = 40
    found = check_for_page(data, tmp_path, "station.yaml")
    messages = [f["message"] for f in found["findings"] if f["path"] == "thresholds.dwell_ms"]
    assert any("below the usual 100 ms" in m for m in messages), found
