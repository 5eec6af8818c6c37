"""The sample video's ground truth: keypoints on the drawn tool, zones as OpenCV sees them,
and the same result every time from the same script and seed."""

from __future__ import annotations

import dataclasses

import cv2
import numpy as np
import pytest

from stationcheck.core.plan import StationPlan
from stationcheck.demo_station import layout
from stationcheck.demo_station import sample_video as sv
from stationcheck.demo_station.choreography import choreograph
from stationcheck.demo_station.ground_truth import ground_truth, point_in_polygon
from stationcheck.demo_station.rig import OperatorRig

W, H = layout.FRAME_WIDTH_PX, layout.FRAME_HEIGHT_PX


def _near_max(mask: np.ndarray, x: float, y: float, radius_px: int = 1) -> float:
    """Largest mask value within ``radius_px`` pixels of (x, y) (pixel-index coordinates)."""
    cx, cy = round(x), round(y)
    patch = mask[
        max(0, cy - radius_px) : cy + radius_px + 1, max(0, cx - radius_px) : cx + radius_px + 1
    ]
    return float(patch.max()) if patch.size else 0.0


def _sampled_frames(production: sv.Production, count: int) -> list[int]:
    visible = [r.frame_index for r in production.rows if r.tip_v == 2]
    step = max(1, len(visible) // count)
    return visible[::step][:count]


def test_tip_and_rear_lie_on_the_tools_own_mask(
    production: sv.Production, demo_rig: OperatorRig
) -> None:
    """Keypoints sit on the tool sprite as placed (within 1 px), in the reference frame and,
    after warping that mask with OpenCV by the frame's camera transform, in the image."""
    for frame in _sampled_frames(production, 60):
        row = production.rows[frame]
        pose = production.choreography.pose(frame)
        tool, _ = demo_rig.coverage(pose, (H, W))
        assert _near_max(tool, row.tip_ref_x_px, row.tip_ref_y_px) >= 0.5, frame
        if row.rear_v == 2:
            assert _near_max(tool, row.rear_ref_x_px, row.rear_ref_y_px) >= 0.5, frame
        camera = production.choreography.camera(frame)
        seen = cv2.warpAffine(tool, camera.matrix(W, H), (W, H), flags=cv2.INTER_LINEAR)
        assert _near_max(seen, row.tip_x_px, row.tip_y_px) >= 0.5, frame


def test_tip_lies_on_the_drawn_tool_in_still_frames(
    production: sv.Production, renderer: sv.FrameRenderer
) -> None:
    """On frames where the tool hardly moves, the drawn tool layer covers the labelled tip."""
    rows = production.rows
    still = [
        r.frame_index
        for r in rows[1:]
        if r.tip_v == 2 and math_dist(r, rows[r.frame_index - 1]) < 0.5
    ]
    assert len(still) > 100
    for frame in still[:: max(1, len(still) // 12)]:
        _, layers = renderer.scene_with_layers(frame)
        assert layers.tool_alpha is not None
        region = layers.tool_region
        full = np.zeros((H, W), np.float32)
        full[region.y0 : region.y1, region.x0 : region.x1] = layers.tool_alpha
        row = rows[frame]
        assert _near_max(full, row.tip_ref_x_px, row.tip_ref_y_px) >= 0.5, frame


def math_dist(a: object, b: object) -> float:
    return float(np.hypot(a.tip_ref_x_px - b.tip_ref_x_px, a.tip_ref_y_px - b.tip_ref_y_px))  # type: ignore[attr-defined]


def test_tip_zone_agrees_with_opencv_point_polygon_test(
    production: sv.Production, demo_plan: StationPlan
) -> None:
    """Reference: OpenCV ``pointPolygonTest`` (>= 0 means inside or on the edge)."""
    contours = {
        z.id: np.asarray(z.polygon_px, np.float32).reshape(-1, 1, 2) for z in demo_plan.zones
    }
    counts: dict[str, int] = {}
    for row in production.rows:
        point = (row.tip_ref_x_px, row.tip_ref_y_px)
        inside = [zid for zid, c in contours.items() if cv2.pointPolygonTest(c, point, False) >= 0]
        assert len(inside) <= 1
        assert row.tip_zone == (inside[0] if inside else ""), row.frame_index
        counts[row.tip_zone] = counts.get(row.tip_zone, 0) + 1
    # every zone is visited in the sample video (the check is not vacuous)
    assert set(counts) >= {z.id for z in demo_plan.zones} | {""}


@pytest.mark.parametrize(
    ("point", "expected"),
    [
        ((0.5, 0.5), True),
        ((0.0, 0.5), True),
        ((1.0, 1.0), True),
        ((1.0001, 0.5), False),
        ((-0.1, 0.2), False),
        ((0.5, 2.0), False),
    ],
)
def test_point_in_polygon_matches_opencv_on_a_square(
    point: tuple[float, float], expected: bool
) -> None:
    """Reference: OpenCV ``pointPolygonTest`` on a unit square, edges included."""
    square = [(0.0, 0.0), (1.0, 0.0), (1.0, 1.0), (0.0, 1.0)]
    reference = (
        cv2.pointPolygonTest(np.asarray(square, np.float32).reshape(-1, 1, 2), point, False) >= 0
    )
    assert point_in_polygon(point, square) == expected == reference


def test_image_position_is_the_camera_transform_of_the_physical_one(
    production: sv.Production,
) -> None:
    """tip_x/y = R(rot)(ref - c) + c + (dx, dy) about the image centre, as the README says."""
    c = np.asarray([(W - 1) / 2.0, (H - 1) / 2.0])
    for row in production.rows[::97]:
        a = np.radians(row.cam_rot_deg)
        rot = np.asarray([[np.cos(a), -np.sin(a)], [np.sin(a), np.cos(a)]])
        expected = (
            rot @ (np.asarray([row.tip_ref_x_px, row.tip_ref_y_px]) - c)
            + c
            + (row.cam_dx_px, row.cam_dy_px)
        )
        assert np.allclose(expected, (row.tip_x_px, row.tip_y_px), atol=0.01)


def test_ground_truth_is_identical_when_regenerated(production: sv.Production) -> None:
    rig = OperatorRig()
    again = ground_truth(choreograph(production.script, rig), rig, production.plan.zones)
    assert again == production.rows
    other_seed = dataclasses.replace(production.script, seed=production.script.seed + 1)
    assert ground_truth(choreograph(other_seed, rig), rig, production.plan.zones) != production.rows


def test_rerendered_frames_are_identical(production: sv.Production) -> None:
    first = sv.FrameRenderer(production)
    second = sv.FrameRenderer(production)
    for frame in (0, 250, production.choreography.frame_count - 1):
        assert np.array_equal(first.render(frame), second.render(frame))
