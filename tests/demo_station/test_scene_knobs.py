"""The scene script's renderer knobs: parsed with clear errors, and the ground truth stays exact
under every camera knob (checked against OpenCV's own matrices and warps)."""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import replace
from typing import Any

import cv2
import numpy as np
import pytest

from stationcheck.core.plan import StationPlan
from stationcheck.demo_station import sample_video as sv
from stationcheck.demo_station.camera import View
from stationcheck.demo_station.look import Look, LookFilter
from stationcheck.demo_station.script import Limits, parse_script
from stationcheck.demo_station.tool_sprite import TOOL_KINDS, ToolStyle, make_tool_sprite
from stationcheck.errors import ConfigError

ScriptDoc = Callable[..., dict[str, Any]]
LIMITS = Limits((4.5, 5.5), (15.0, 45.0), tuple(f"screw_{i}" for i in range(1, 7)))


def test_every_knob_parses(script_doc: ScriptDoc) -> None:
    doc = script_doc()
    doc.update(
        tool={"kind": "angle_head", "length_px": 150, "body_bgr": [40, 40, 150]},
        operator={"speed": 1.5, "glove_bgr": [40, 40, 42], "sleeve_bgr": [60, 60, 62]},
        bench="steel",
        camera={
            "zoom": 1.15,
            "tilt_deg": 8,
            "rot_deg": 4,
            "width_px": 800,
            "height_px": 600,
            "fps": 25,
        },
        look={"gain": 0.7, "light_from": [0.9, 0.1], "light_falloff": 0.4},
    )
    script = parse_script(doc, LIMITS)
    knobs = script.knobs
    assert knobs.tool.kind == "angle_head" and knobs.tool.body_bgr == (40.0, 40.0, 150.0)
    assert knobs.arm.glove_bgr == (40.0, 40.0, 42.0) and knobs.operator_speed == 1.5
    assert knobs.bench == "steel" and knobs.fps == 25.0
    assert knobs.view == View(1.15, 8.0, 4.0, 800, 600)
    assert script.look.light_from == (0.9, 0.1)


@pytest.mark.parametrize(
    ("extra", "message"),
    [
        ({"tool": {"kind": "hammer"}}, "tool: ToolStyle.kind must be one of"),
        ({"tool": {"length_px": 20}}, "tool: ToolStyle.length_px must be in [60, 400]"),
        ({"tool": {"body_bgr": [1, 2]}}, "tool.body_bgr: expected three numbers in [0, 255]"),
        ({"tool": {"has_cable": "yes"}}, "tool: ToolStyle.has_cable must be true or false"),
        ({"tool": {"colour": 3}}, "tool: unknown keys ['colour']"),
        ({"operator": {"speed": 9}}, "operator.speed: must be in [0.3, 3]"),
        ({"operator": {"glove_bgr": [0, 0, 300]}}, "operator.glove_bgr: expected three numbers"),
        ({"bench": "marble"}, "bench: expected one of"),
        ({"camera": {"zoom": 5}}, "camera: View.zoom must be in [0.5, 2.5]"),
        ({"camera": {"tilt_deg": 45}}, "camera: View.tilt_deg must be in [-30, 30]"),
        ({"camera": {"width_px": 10.5}}, "camera: View.width_px must be an integer"),
        ({"camera": {"fps": 1}}, "camera.fps: must be in [5, 120]"),
        ({"camera": "wide"}, "camera: expected a mapping"),
        ({"look": {"light_falloff": 2}}, "look: Look.light_falloff must be in [0, 1]"),
        ({"lighting": {}}, "unknown keys ['lighting']"),
    ],
)
def test_bad_knobs_are_reported_with_their_place(
    script_doc: ScriptDoc, extra: dict[str, Any], message: str
) -> None:
    doc = script_doc()
    doc.update(extra)
    with pytest.raises(ConfigError) as caught:
        parse_script(doc, LIMITS)
    assert message in str(caught.value)


def test_problems_in_several_knobs_come_together(script_doc: ScriptDoc) -> None:
    doc = script_doc()
    doc.update(bench="marble", camera={"zoom": 5})
    with pytest.raises(ConfigError) as caught:
        parse_script(doc, LIMITS)
    assert "bench:" in str(caught.value) and "camera:" in str(caught.value)


def _production(demo_plan: StationPlan, script_doc: ScriptDoc, **top: Any) -> sv.Production:
    doc = script_doc(
        fasten=[{"tighten": "screw_1", "ok": True, "torque_nm": 5.0, "angle_deg": 30.0}], pin="none"
    )
    doc.update(top)
    return sv.plan_production(parse_script(doc, sv.script_limits(demo_plan)), demo_plan)


def _points(rows: list[Any], visible_only: bool = False) -> np.ndarray:
    return np.array([[(r.tip_x_px, r.tip_y_px), (r.rear_x_px, r.rear_y_px)] for r in rows])


@pytest.fixture(scope="module")
def plain(demo_plan: StationPlan) -> sv.Production:
    from tests.demo_station.conftest import _script_doc

    return _production(demo_plan, _script_doc)


@pytest.mark.parametrize(("zoom", "rot_deg"), [(1.15, 0.0), (1.0, 4.0), (0.9, -7.5)])
def test_zoom_and_roll_move_the_truth_as_opencvs_rotation_matrix_does(
    demo_plan: StationPlan, script_doc: ScriptDoc, plain: sv.Production, zoom: float, rot_deg: float
) -> None:
    moved = _production(demo_plan, script_doc, camera={"zoom": zoom, "rot_deg": rot_deg})
    # Reference: OpenCV's getRotationMatrix2D about the pixel centre (its angle is
    # counter-clockwise on screen, ours clockwise), applied with cv2.transform.
    matrix = cv2.getRotationMatrix2D((319.5, 239.5), -rot_deg, zoom)
    expected = cv2.transform(_points(plain.rows).reshape(-1, 1, 2), matrix).reshape(-1, 2, 2)
    assert np.abs(_points(moved.rows) - expected).max() <= 1.5e-3  # truth is rounded to 1e-3
    assert [r.tip_zone for r in moved.rows] == [r.tip_zone for r in plain.rows]


def test_frame_size_scales_the_truth_with_opencvs_pixel_centre_convention(
    demo_plan: StationPlan, script_doc: ScriptDoc, plain: sv.Production
) -> None:
    moved = _production(demo_plan, script_doc, camera={"width_px": 800, "height_px": 360})
    # cv2.resize maps pixel centres: x_out = (x_in + 0.5) * scale - 0.5 (OpenCV docs, INTER_LINEAR)
    scale = np.array([800 / 640, 360 / 480])
    expected = (_points(plain.rows) + 0.5) * scale - 0.5
    assert np.abs(_points(moved.rows) - expected).max() <= 1.5e-3


@pytest.mark.parametrize(
    "view",
    [View(zoom=1.15), View(rot_deg=4.0), View(tilt_deg=12.0), View(1.1, -9.0, 3.0, 800, 600)],
)
def test_the_picture_moves_with_the_truth_under_opencvs_warp(view: View) -> None:
    """A bright dot drawn at known points, warped by the view (cv2.warpAffine or
    cv2.warpPerspective), has its centroid where View.apply puts the point."""
    for x, y in ((100.3, 80.7), (320.0, 240.0), (520.6, 400.2)):
        image = np.zeros((480, 640, 3), np.uint8)
        cv2.circle(
            image, (round(x * 16), round(y * 16)), 5 * 16, (255, 255, 255), -1, cv2.LINE_AA, 4
        )
        warped = view.warp(image)[:, :, 0].astype(np.float64)
        assert warped.shape == (view.height_px, view.width_px)
        moments = cv2.moments(warped)
        centroid = (moments["m10"] / moments["m00"], moments["m01"] / moments["m00"])
        assert math.dist(centroid, view.apply((x, y), 640, 480)) < 0.25


def test_operator_speed_shortens_moves_but_not_dwell_or_runs(
    demo_plan: StationPlan, script_doc: ScriptDoc, plain: sv.Production
) -> None:
    fast = _production(demo_plan, script_doc, operator={"speed": 2.0})
    assert fast.choreography.frame_count < 0.85 * plain.choreography.frame_count
    runs = [
        np.diff([i.frame for i in p.choreography.inputs if i.kind == "tool_running"])[::2]
        for p in (plain, fast)
    ]
    assert len(runs[0]) == 1 and list(runs[0]) == list(runs[1])  # the run lasts as long
    assert [d["kind"] for d in fast.decisions] == [d["kind"] for d in plain.decisions]


def test_frame_rate_sets_the_clock_of_the_truth(
    demo_plan: StationPlan, script_doc: ScriptDoc, plain: sv.Production
) -> None:
    slow = _production(demo_plan, script_doc, camera={"fps": 15})
    assert slow.choreography.fps == 15.0
    assert slow.rows[3].t_s == pytest.approx(3 / 15.0)
    duration = [p.rows[-1].t_s for p in (plain, slow)]
    assert duration[1] == pytest.approx(duration[0], abs=0.35)


@pytest.mark.parametrize("kind", TOOL_KINDS)
def test_every_tool_kind_has_its_keypoints_on_the_tool(kind: str) -> None:
    sprite = make_tool_sprite(ToolStyle(kind=kind))  # type: ignore[arg-type]
    alpha = sprite.alpha
    for name in ("tip", "rear"):
        x, y = sprite.points[name]
        assert alpha[round(y), round(x)] > 0.5, name


def test_the_lamp_brightens_the_bench_towards_it() -> None:
    flat = np.full((48, 64, 3), 100, np.uint8)
    lit = LookFilter(Look(light_from=(1.0, 0.0), light_falloff=0.6), 64, 48, 0).apply(
        flat, np.random.default_rng(0)
    )
    assert lit[2, 61, 1] > 100 > lit[45, 2, 1]


def test_the_sample_video_script_keeps_its_plain_knobs(production: sv.Production) -> None:
    knobs = production.script.knobs
    assert knobs.view.is_identity and knobs.fps == 30.0 and knobs.operator_speed == 1.0
    assert replace(knobs) == knobs
