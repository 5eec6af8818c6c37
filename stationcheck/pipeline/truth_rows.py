"""The per-frame ground-truth sidecar of a recording (CSV), and the polygon tests it is read with.

Columns (one row per video frame; documented in ``sample_video/README.md``): image positions of
tip and rear after the camera's move, their COCO visibility, their reference-frame (physical)
positions, the zone the tip is physically in, hand-in-bin flags, the locking pin, whether
anything covers the pin's check zone, the camera transform, the serial of the unit on the
fixture. The demo renderer writes it (:mod:`stationcheck.demo_station.ground_truth`); replays
read it to count false enables and to stand in for the detector and the image judgements.
"""

from __future__ import annotations

import csv
import math
from collections.abc import Sequence
from dataclasses import astuple, dataclass, fields
from pathlib import Path
from typing import Any

from stationcheck.errors import InputFileError

Point = tuple[float, float]


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
