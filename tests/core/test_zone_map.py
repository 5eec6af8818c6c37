"""Zone membership, hysteresis and dwell.

Reference: OpenCV's ``cv2.pointPolygonTest`` (4.14), a general-purpose geometry routine the
project did not write: > 0 inside, < 0 outside, 0 on the outline; with ``measureDist`` it is the
signed distance to the outline. The core itself never imports OpenCV.
"""

from __future__ import annotations

import logging
import math

import cv2
import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from shapely.geometry import Polygon

from stationcheck.core.plan import StationPlan, Thresholds, ZoneSpec
from stationcheck.core.records import ToolPose
from stationcheck.core.zones import ZoneMap, ZoneVisit
from stationcheck.errors import ConfigError


def opencv_signed_distance(
    polygon: tuple[tuple[float, float], ...], point: tuple[float, float]
) -> float:
    contour = np.array(polygon, dtype=np.float32).reshape(-1, 1, 2)
    return float(cv2.pointPolygonTest(contour, point, True))


Outline = tuple[tuple[float, float], ...]


@st.composite
def simple_polygons(draw: st.DrawFn) -> tuple[Outline, tuple[float, float]]:
    """Star-shaped polygons (sorted angles around a centre) with integer vertices: simple by
    construction, rejected if rounding made them touch themselves. Returns (outline, centre)."""
    count = draw(st.integers(min_value=3, max_value=12))
    cx, cy = draw(st.integers(100, 500)), draw(st.integers(100, 400))
    angles = sorted(
        draw(
            st.lists(
                st.floats(0.0, 2 * math.pi, exclude_max=True),
                min_size=count,
                max_size=count,
                unique=True,
            )
        )
    )
    radii = draw(st.lists(st.floats(5.0, 90.0), min_size=count, max_size=count))
    points = tuple(
        (float(round(cx + r * math.cos(a))), float(round(cy + r * math.sin(a))))
        for a, r in zip(angles, radii, strict=True)
    )
    shape = Polygon(points)
    assume(len(set(points)) == count and shape.is_valid and shape.area > 1.0)
    return points, (float(cx), float(cy))


def single_zone_map(
    polygon: Outline, hysteresis_px: float = 4.0, dwell_ms: float = 200.0
) -> ZoneMap:
    return ZoneMap(
        [ZoneSpec("z", "fastener", polygon)], hysteresis_px=hysteresis_px, dwell_ms=dwell_ms
    )


def near(
    shape: tuple[Outline, tuple[float, float]], margin_px: float = 15.0
) -> st.SearchStrategy[tuple[float, float]]:
    """Points in the polygon's bounding box grown by a margin, or on the way from a vertex to the
    star's centre (inside), so inside and outside both occur often; float32 values, because
    OpenCV takes the query point as float32."""
    polygon, (mx, my) = shape
    xs, ys = [x for x, _ in polygon], [y for _, y in polygon]
    box = st.tuples(
        st.floats(min(xs) - margin_px, max(xs) + margin_px),
        st.floats(min(ys) - margin_px, max(ys) + margin_px),
    )
    towards_centre = st.tuples(
        st.sampled_from(polygon), st.integers(1, 99).map(lambda k: k / 100)
    ).map(lambda vt: (vt[0][0] + vt[1] * (mx - vt[0][0]), vt[0][1] + vt[1] * (my - vt[0][1])))
    return st.one_of(box, towards_centre).map(
        lambda p: (float(np.float32(p[0])), float(np.float32(p[1])))
    )


@settings(max_examples=300, deadline=None)
@given(shape=simple_polygons(), data=st.data())
def test_membership_and_distance_match_opencv_point_polygon_test(
    shape: tuple[Outline, tuple[float, float]], data: st.DataObject
) -> None:
    polygon = shape[0]
    point = data.draw(near(shape))
    reference = opencv_signed_distance(polygon, point)
    assume(abs(reference) > 1e-3)  # the outline itself is checked exactly below
    zones = single_zone_map(polygon)
    assert (zones.zones_at(point) == ("z",)) is (reference > 0)
    assert zones.signed_distance_px("z", point) == pytest.approx(reference, abs=1e-3)


@settings(max_examples=100, deadline=None)
@given(shape=simple_polygons(), data=st.data())
def test_points_on_the_outline_count_as_inside_as_in_opencv(
    shape: tuple[Outline, tuple[float, float]], data: st.DataObject
) -> None:
    polygon = shape[0]
    i = data.draw(st.integers(0, len(polygon) - 1))
    a, b = polygon[i], polygon[(i + 1) % len(polygon)]
    vertex_or_midpoint = data.draw(st.sampled_from([a, ((a[0] + b[0]) / 2, (a[1] + b[1]) / 2)]))
    assert (
        cv2.pointPolygonTest(
            np.array(polygon, np.float32).reshape(-1, 1, 2), vertex_or_midpoint, False
        )
        == 0
    )
    assert single_zone_map(polygon).zones_at(vertex_or_midpoint) == ("z",)


def pose(t_s: float, point: tuple[float, float] | None) -> ToolPose:
    return ToolPose(
        t_s=t_s,
        frame_index=0,
        tip_px=point,
        rear_px=None,
        visible=point is not None,
        seen=point is not None,
        score=0.9 if point else 0.0,
    )


@settings(max_examples=150, deadline=None)
@given(
    shape=simple_polygons(), data=st.data(), hysteresis_px=st.sampled_from([0.0, 2.0, 4.0, 10.0])
)
def test_hysteresis_matches_a_reference_model_on_opencv_distances(
    shape: tuple[Outline, tuple[float, float]], data: st.DataObject, hysteresis_px: float
) -> None:
    """Reference model: enter when pointPolygonTest >= 0, leave when it is < -hysteresis."""
    polygon = shape[0]
    walk = data.draw(st.lists(near(shape), min_size=2, max_size=40))
    distances = [opencv_signed_distance(polygon, p) for p in walk]
    assume(all(abs(d) > 1e-3 and abs(d + hysteresis_px) > 1e-3 for d in distances))
    zones = single_zone_map(polygon, hysteresis_px=hysteresis_px)
    visit, inside = zones.initial_state(), False
    for i, (point, distance) in enumerate(zip(walk, distances, strict=True)):
        inside = distance >= -hysteresis_px if inside else distance >= 0
        visit, observation = zones.observe(visit, pose(i / 30.0, point))
        assert (observation.zone == "z") is inside


PAIR = (
    ZoneSpec("left", "fastener", ((0, 0), (20, 0), (20, 20), (0, 20))),
    ZoneSpec("right", "fastener", ((30, 0), (50, 0), (50, 20), (30, 20))),
)


def walk(
    zones: ZoneMap, points: list[tuple[float, float] | None], period_s: float = 0.05
) -> list[tuple[str | None, str | None]]:
    visit, seen = zones.initial_state(), []
    for i, point in enumerate(points):
        visit, observation = zones.observe(visit, pose(i * period_s, point))
        seen.append((observation.zone, observation.arrived_zone))
    return seen


def test_dwell_before_arrival_is_measured_on_timestamps() -> None:
    zones = ZoneMap(PAIR, hysteresis_px=4.0, dwell_ms=100.0)
    seen = walk(zones, [(10, 10)] * 4, period_s=0.05)
    assert seen == [("left", None), ("left", None), ("left", "left"), ("left", "left")]
    slow = walk(zones, [(10, 10)] * 2, period_s=0.2)
    assert slow == [("left", None), ("left", "left")]


def test_a_new_zone_or_a_gap_restarts_the_dwell() -> None:
    zones = ZoneMap(PAIR, hysteresis_px=4.0, dwell_ms=100.0)
    seen = walk(zones, [(10, 10), (10, 10), (10, 10), (40, 10), (40, 10), None, (40, 10)])
    assert seen == [
        ("left", None),
        ("left", None),
        ("left", "left"),
        ("right", None),
        ("right", None),
        (None, None),
        ("right", None),
    ]


def test_a_tip_in_no_zone_and_an_invisible_tool() -> None:
    zones = ZoneMap(PAIR, hysteresis_px=4.0, dwell_ms=100.0)
    visit, observation = zones.observe(zones.initial_state(), pose(0.0, (200.0, 200.0)))
    assert (visit, observation.zone, observation.visible) == (ZoneVisit(), None, True)
    visit, observation = zones.observe(visit, pose(0.1, None))
    assert (observation.zone, observation.visible, observation.tip_px) == (None, False, None)


def test_hysteresis_keeps_the_zone_between_close_neighbours() -> None:
    zones = ZoneMap(PAIR, hysteresis_px=4.0, dwell_ms=0.0)
    # 23 px is 3 px outside "left" (inside the margin), 33 px is inside "right"
    assert [z for z, _ in walk(zones, [(19, 10), (23, 10), (25, 10), (33, 10)])] == [
        "left",
        "left",
        None,
        "right",
    ]


def test_overlapping_zones_do_not_crash_and_the_smaller_wins(
    caplog: pytest.LogCaptureFixture,
) -> None:
    big = ZoneSpec("big", "fastener", ((0, 0), (100, 0), (100, 100), (0, 100)))
    small = ZoneSpec("small", "fastener", ((40, 40), (60, 40), (60, 60), (40, 60)))
    with caplog.at_level(logging.WARNING, logger="stationcheck.core.zones"):
        zones = ZoneMap([big, small], hysteresis_px=2.0, dwell_ms=0.0)
    assert "overlap" in caplog.text
    assert zones.zones_at((50, 50)) == ("small", "big")
    assert zones.zones_at((10, 10)) == ("big",)


def test_many_zones_are_looked_up_through_the_tree() -> None:
    grid = [
        ZoneSpec(
            f"z{i}_{j}",
            "fastener",
            (
                (i * 10, j * 10),
                (i * 10 + 8, j * 10),
                (i * 10 + 8, j * 10 + 8),
                (i * 10, j * 10 + 8),
            ),
        )
        for i in range(40)
        for j in range(40)
    ]
    zones = ZoneMap(grid, hysteresis_px=1.0, dwell_ms=0.0)
    assert zones.zones_at((123.0, 245.0)) == ("z12_24",)
    assert zones.zones_at((129.0, 245.0)) == ()


def test_from_plan_takes_fastener_zones_and_thresholds() -> None:
    plan = StationPlan(
        zones=(PAIR[0], ZoneSpec("bin", "bin", ((0, 0), (20, 0), (20, 20), (0, 20)))),
        steps=(),
        thresholds=Thresholds(hysteresis_px=6.0, dwell_ms=150.0),
    )
    zones = ZoneMap.from_plan(plan)
    assert (zones.zone_ids, zones.hysteresis_px, zones.dwell_ms) == (("left",), 6.0, 150.0)
    assert ZoneMap.from_plan(plan, kinds=("fastener", "bin")).zone_ids == ("left", "bin")


@pytest.mark.parametrize(
    ("zones", "message"),
    [
        (
            [ZoneSpec("a", "fastener", ((0, 0), (1, 1)))],
            "zone 'a': polygon needs at least 3 points, got 2",
        ),
        (
            [ZoneSpec("a", "fastener", ((0, 0), (1, 1), (2, 2)))],
            "zone 'a': polygon must enclose an area > 0",
        ),
        ([PAIR[0], PAIR[0]], r"zone ids must be unique, got duplicates \['left'\]"),
    ],
)
def test_degenerate_zones_are_config_errors(zones: list[ZoneSpec], message: str) -> None:
    with pytest.raises(ConfigError, match=message):
        ZoneMap(zones, hysteresis_px=4.0, dwell_ms=100.0)


def test_a_self_intersecting_zone_is_repaired_not_fatal(caplog: pytest.LogCaptureFixture) -> None:
    bowtie = ZoneSpec("bow", "fastener", ((0, 0), (20, 20), (20, 0), (0, 20)))
    with caplog.at_level(logging.WARNING, logger="stationcheck.core.zones"):
        zones = ZoneMap([bowtie], hysteresis_px=1.0, dwell_ms=0.0)
    assert "not simple" in caplog.text
    assert zones.zones_at((10, 10)) == ("bow",)
