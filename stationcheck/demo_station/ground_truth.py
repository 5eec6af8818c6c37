"""Per-frame ground truth of the sample video, from the plan (never from a detector).

Columns (CSV, one row per video frame; documented in ``sample_video/README.md``):
image positions of tip and rear after the camera's move (and the script's camera view:
zoom, tilt, roll, frame size), their COCO visibility, their
reference-frame (physical) positions, the zone the tip is physically in, hand-in-bin flags,
the locking pin, whether anything covers the pin's check zone, the camera transform, the
serial of the unit on the fixture.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Sequence
from dataclasses import astuple, dataclass, fields
from pathlib import Path
from typing import Any

from stationcheck.core.plan import ZoneSpec
from stationcheck.demo_station import layout
from stationcheck.demo_station.camera import View
from stationcheck.demo_station.choreography import Choreography
from stationcheck.demo_station.rig import OperatorRig
from stationcheck.demo_station.shading import Point
from stationcheck.errors import InputFileError

WIDTH_PX, HEIGHT_PX = layout.FRAME_WIDTH_PX, layout.FRAME_HEIGHT_PX
OCCLUDED_ALPHA = 0.5
CLEAR_ALPHA = 0.1


@dataclass(frozen=True)
class TruthRow:
    frame_index: int
    t_s: float
    tip_x_px: float
    tip_y_px: float
    tip_v: int  # COCO: 0 outside the frame, 1 in the frame but covered, 2 visible
    rear_x_px: float
    rear_y_px: float
    rear_v: int
    tip_ref_x_px: float
    tip_ref_y_px: float
    rear_ref_x_px: float
    rear_ref_y_px: float
    tip_zone: str  # zone id containing the physical tip, "" for none
    hand_in_bin_gasket: int
    hand_in_bin_cover: int
    pin_engaged: int
    pin_zone_clear: int  # 1 when no hand or tool covers the locking pin's check zone
    cam_dx_px: float
    cam_dy_px: float
    cam_rot_deg: float
    serial: str


COLUMNS = tuple(f.name for f in fields(TruthRow))


def point_in_polygon(point: Point, polygon: Sequence[tuple[float, float]]) -> bool:
    """Even-odd rule; a point on an edge counts as inside."""
    if distance_to_polygon_edge(point, polygon) <= 1e-9:
        return True
    x, y = point
    inside = False
    n = len(polygon)
    for i in range(n):
        (x0, y0), (x1, y1) = polygon[i], polygon[(i + 1) % n]
        if (y0 > y) != (y1 > y):
            x_cross = x0 + (y - y0) * (x1 - x0) / (y1 - y0)
            if x < x_cross:
                inside = not inside
    return inside


def distance_to_polygon_edge(point: Point, polygon: Sequence[tuple[float, float]]) -> float:
    px, py = point
    best = math.inf
    n = len(polygon)
    for i in range(n):
        (x0, y0), (x1, y1) = polygon[i], polygon[(i + 1) % n]
        dx, dy = x1 - x0, y1 - y0
        length2 = dx * dx + dy * dy
        u = 0.0 if length2 == 0 else max(0.0, min(1.0, ((px - x0) * dx + (py - y0) * dy) / length2))
        best = min(best, math.hypot(px - (x0 + u * dx), py - (y0 + u * dy)))
    return best


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


def write_truth_csv(rows: Sequence[TruthRow], path: Path) -> None:
    with open(path, "w", newline="", encoding="utf-8") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(COLUMNS)
        for row in rows:
            writer.writerow(astuple(row))


def read_truth_csv(path: Path) -> list[TruthRow]:
    try:
        with open(path, newline="", encoding="utf-8") as handle:
            reader = csv.DictReader(handle)
            if tuple(reader.fieldnames or ()) != COLUMNS:
                raise InputFileError(f"{path}: unexpected columns {reader.fieldnames}")
            out = []
            for line, raw in enumerate(reader, start=2):
                try:
                    values: dict[str, Any] = {
                        f.name: _convert(f.type, raw[f.name]) for f in fields(TruthRow)
                    }
                    out.append(TruthRow(**values))
                except (TypeError, ValueError) as exc:
                    raise InputFileError(f"{path}:{line}: bad row ({exc})") from exc
    except OSError as exc:
        raise InputFileError(f"cannot read {path}: {exc}") from exc
    return out


def _convert(kind: object, text: str) -> object:
    if kind in (int, "int"):
        return int(text)
    if kind in (float, "float"):
        return float(text)
    return text
