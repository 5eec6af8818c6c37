"""Per-frame ground truth of the sample video, from the plan (never from a detector).

Columns (CSV, one row per video frame; documented in ``sample_video/README.md``):
image positions of tip and rear after the camera's move (and the script's camera view:
zoom, tilt, roll, frame size), their COCO visibility, their
reference-frame (physical) positions, the zone the tip is physically in, hand-in-bin flags,
the locking pin, whether anything covers the pin's check zone, the camera transform, the
serial of the unit on the fixture.
"""

from __future__ import annotations

from collections.abc import Sequence

from stationcheck.core.plan import ZoneSpec
from stationcheck.demo_station import layout
from stationcheck.demo_station.camera import View
from stationcheck.demo_station.choreography import Choreography
from stationcheck.demo_station.rig import OperatorRig
from stationcheck.demo_station.shading import Point
from stationcheck.pipeline.truth_rows import TruthRow, point_in_polygon

WIDTH_PX, HEIGHT_PX = layout.FRAME_WIDTH_PX, layout.FRAME_HEIGHT_PX
OCCLUDED_ALPHA = 0.5
CLEAR_ALPHA = 0.1


def zone_of(point: Point, zones: Sequence[ZoneSpec]) -> str:
    """The first zone containing the point, or "" (the demo zones do not overlap)."""
    for zone in zones:
        if point_in_polygon(point, zone.polygon_px):
            return zone.id
    return ""


def _in_frame(point: Point, view: View) -> bool:
    return 0.0 <= point[0] <= view.width_px - 1 and 0.0 <= point[1] <= view.height_px - 1


def _grid(polygon: Sequence[tuple[float, float]], steps: int = 5) -> list[Point]:
    xs = [p[0] for p in polygon]
    ys = [p[1] for p in polygon]
    return [
        (
            min(xs) + (max(xs) - min(xs)) * i / (steps - 1),
            min(ys) + (max(ys) - min(ys)) * j / (steps - 1),
        )
        for i in range(steps)
        for j in range(steps)
    ]


def ground_truth(
    chor: Choreography, rig: OperatorRig, zones: Sequence[ZoneSpec], view: View | None = None
) -> list[TruthRow]:
    view = view or View()
    by_id = {z.id: z for z in zones}
    pin_points = _grid(by_id["locking_pin"].polygon_px)
    rows = []
    for frame in range(chor.frame_count):
        pose = chor.pose(frame)
        placed = rig.place(pose)
        tip, rear = rig.keypoints_placed(placed)
        camera = chor.camera(frame)
        state, _, _ = chor.state(frame)
        visibility = []
        image_points = []
        for point in (tip, rear):
            seen = view.apply(camera.apply(point, WIDTH_PX, HEIGHT_PX), WIDTH_PX, HEIGHT_PX)
            image_points.append(seen)
            covered = rig.coverage_at(pose, placed, point)[1] >= OCCLUDED_ALPHA
            visibility.append(0 if not _in_frame(seen, view) else (1 if covered else 2))
        reach = rig.reach_placed(placed)
        clear = not any(
            max(cover[0], cover[2]) >= CLEAR_ALPHA
            for cover in (rig.coverage_at(pose, placed, p) for p in pin_points)
        )
        unit = chor.unit_at(frame)
        rows.append(
            TruthRow(
                frame_index=frame,
                t_s=round(frame / chor.fps, 6),
                tip_x_px=round(image_points[0][0], 3),
                tip_y_px=round(image_points[0][1], 3),
                tip_v=visibility[0],
                rear_x_px=round(image_points[1][0], 3),
                rear_y_px=round(image_points[1][1], 3),
                rear_v=visibility[1],
                tip_ref_x_px=round(tip[0], 3),
                tip_ref_y_px=round(tip[1], 3),
                rear_ref_x_px=round(rear[0], 3),
                rear_ref_y_px=round(rear[1], 3),
                tip_zone=zone_of((round(tip[0], 3), round(tip[1], 3)), zones),
                hand_in_bin_gasket=int(point_in_polygon(reach, by_id["bin_gasket"].polygon_px)),
                hand_in_bin_cover=int(point_in_polygon(reach, by_id["bin_cover"].polygon_px)),
                pin_engaged=int(state.pin_engaged),
                pin_zone_clear=int(clear),
                cam_dx_px=camera.dx_px,
                cam_dy_px=camera.dy_px,
                cam_rot_deg=camera.rot_deg,
                serial=unit.serial if unit else "",
            )
        )
    return rows
