"""The demo station config (demo data): clean, and the plan it builds is what the YAML says."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

import pytest
import yaml

from stationcheck.config import check_data, check_file
from stationcheck.core.bolt_pattern import apply_order, bolt_circle_zones_px, cross_order
from stationcheck.core.plan import FastenStep, StationPlan
from stationcheck.demo_station import layout


def flat(points: Sequence[Sequence[float]]) -> list[float]:
    return [value for point in points for value in point]


@pytest.fixture
def raw(demo_config_path: Path) -> dict[str, Any]:
    data: dict[str, Any] = yaml.safe_load(demo_config_path.read_text(encoding="utf-8"))
    return data


@pytest.fixture
def plan(demo_config_path: Path) -> StationPlan:
    result = check_file(demo_config_path)
    assert result.config is not None, result.lines()
    return result.config.to_plan()


def test_demo_config_passes_with_no_warnings(demo_config_path: Path) -> None:
    result = check_file(demo_config_path, shown_as="configs/demo_station.yaml")
    assert result.findings == (), result.lines()
    assert result.summary() == (
        "configs/demo_station.yaml: OK, no errors or warnings (9 zones, 4 steps)"
    )


def test_demo_config_says_it_is_demo_data(demo_config_path: Path, raw: dict[str, Any]) -> None:
    assert "DEMO DATA" in demo_config_path.read_text(encoding="utf-8").splitlines()[0]
    assert "demo data" in raw["station"]["name"]


def test_plan_zones_are_the_yaml_zones(plan: StationPlan, raw: dict[str, Any]) -> None:
    assert [(z.id, z.kind, z.label) for z in plan.zones] == [
        (z["id"], z["kind"], z["label"]) for z in raw["zones"]
    ]
    for zone, written in zip(plan.zones, raw["zones"], strict=True):
        assert zone.polygon_px == tuple((float(x), float(y)) for x, y in written["polygon"])


def test_plan_steps_and_thresholds_are_the_yaml_ones(
    plan: StationPlan, raw: dict[str, Any]
) -> None:
    assert [(s.id, s.kind) for s in plan.steps] == [(s["id"], s["kind"]) for s in raw["steps"]]
    fasten = plan.steps[2]
    written = raw["steps"][2]
    assert isinstance(fasten, FastenStep)
    assert list(fasten.zones) == written["zones"]
    assert (fasten.max_attempts, fasten.on_failure) == (written["max_attempts"],
                                                        written["on_failure"])
    assert fasten.torque_nm is not None and fasten.angle_deg is not None
    assert (fasten.torque_nm.low, fasten.torque_nm.high) == (4.5, 5.5)
    assert (fasten.angle_deg.low, fasten.angle_deg.high) == (15, 45)
    assert plan.steps[0].zone == "bin_gasket"  # type: ignore[union-attr]
    assert plan.steps[3].expect == "present"  # type: ignore[union-attr]
    thresholds = raw["thresholds"]
    assert plan.thresholds.min_score == raw["model"]["min_score"]
    assert plan.thresholds.dwell_ms == thresholds["dwell_ms"]
    assert plan.thresholds.lost_track_grace_ms == thresholds["lost_track_grace_ms"]
    assert plan.thresholds.hysteresis_px == thresholds["hysteresis_px"]
    assert plan.thresholds.stale_frame_ms == thresholds["stale_frame_ms"]


def test_demo_screws_are_tightened_in_cross_order(plan: StationPlan) -> None:
    fasten = plan.steps[2]
    assert isinstance(fasten, FastenStep)
    clockwise = [f"screw_{n}" for n in range(1, 7)]
    assert list(fasten.zones) == apply_order(clockwise, cross_order(6))


def test_demo_screw_zones_sit_on_the_demo_bolt_circle(plan: StationPlan) -> None:
    expected = bolt_circle_zones_px(
        layout.COVER_CENTRE_PX, layout.BOLT_CIRCLE_RADIUS_PX, layout.BOLT_COUNT,
        layout.BOLT_START_ANGLE_DEG, 2 * layout.FASTENER_ZONE_HALF_SIZE_PX,
    )
    screws = [zone for zone in plan.zones if zone.kind == "fastener"]
    assert [z.id for z in screws] == [f"screw_{n}" for n in range(1, 7)]
    for zone, polygon in zip(screws, expected, strict=True):
        assert flat(zone.polygon_px) == pytest.approx(flat(polygon), abs=0.11)  # 0.1 px rounding


def test_the_commented_bolt_circle_writes_out_the_demo_screws(
    demo_config_path: Path, raw: dict[str, Any], plan: StationPlan, tmp_path: Path
) -> None:
    lines = demo_config_path.read_text(encoding="utf-8").splitlines()
    start = next(i for i, line in enumerate(lines) if line.startswith("#   - bolt_circle:"))
    block = "\n".join(line[1:] for line in lines[start:start + 2])
    shorthand = yaml.safe_load(block)
    raw["zones"] = shorthand + [z for z in raw["zones"] if z["kind"] != "fastener"]
    result = check_data(raw, base_dir=demo_config_path.parent)
    assert result.config is not None, result.lines()
    rebuilt = result.config.to_plan()
    assert [(z.id, z.label) for z in rebuilt.zones] == [(z.id, z.label) for z in plan.zones]
    for ours, demo in zip(rebuilt.zones, plan.zones, strict=True):
        assert flat(ours.polygon_px) == pytest.approx(flat(demo.polygon_px), abs=0.11)


def test_the_plan_carries_the_station_name(plan: StationPlan, raw: dict[str, Any]) -> None:
    assert plan.station == raw["station"]["name"]
