"""The part of a frame a zone judgement looks at: the zone's bounding box and polygon mask."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.errors import ConfigError

U8Array = npt.NDArray[np.uint8]
PolygonPx = Sequence[tuple[float, float]]


@dataclass(frozen=True)
class ZoneWindow:
    """Pixel box ``[x0, x1) x [y0, y1)`` around a zone (clipped to the frame) and a mask that is
    255 inside the polygon. ``crop`` returns a view, not a copy."""

    zone_id: str
    x0: int
    y0: int
    x1: int
    y1: int
    mask: U8Array

    @property
    def width_px(self) -> int:
        return self.x1 - self.x0

    @property
    def height_px(self) -> int:
        return self.y1 - self.y0

    def crop(self, image: npt.NDArray[np.generic]) -> npt.NDArray[np.generic]:
        return image[self.y0 : self.y1, self.x0 : self.x1]


def zone_box_px(polygon: PolygonPx) -> tuple[int, int, int, int]:
    """Whole-pixel box ``(x0, y0, x1, y1)`` (end exclusive) covering the polygon."""
    xs = [float(p[0]) for p in polygon]
    ys = [float(p[1]) for p in polygon]
    return (math.floor(min(xs)), math.floor(min(ys)), math.ceil(max(xs)), math.ceil(max(ys)))


def zone_window(
    zone_id: str, polygon: PolygonPx, width_px: int, height_px: int, margin_px: int = 0
) -> ZoneWindow:
    """The window of a zone in a ``width_px`` x ``height_px`` frame, grown by ``margin_px``.

    Raises:
        ConfigError: the zone lies (almost) entirely outside the frame.
    """
    bx0, by0, bx1, by1 = zone_box_px(polygon)
    x0, y0 = max(0, bx0 - margin_px), max(0, by0 - margin_px)
    x1, y1 = min(width_px, bx1 + margin_px), min(height_px, by1 + margin_px)
    if x1 - x0 < 2 or y1 - y0 < 2:
        raise ConfigError(
            f"zone '{zone_id}' lies outside the {width_px}x{height_px} camera frame "
            f"(box {bx0},{by0} to {bx1},{by1})"
        )
    mask = np.zeros((y1 - y0, x1 - x0), np.uint8)
    points = np.round((np.asarray(polygon, np.float64) - (x0, y0)) * 16.0).astype(np.int32)
    cv2.fillPoly(mask, [points], 255, lineType=cv2.LINE_8, shift=4)
    if not mask.any():
        raise ConfigError(f"zone '{zone_id}' covers no whole pixel of the camera frame")
    return ZoneWindow(zone_id, x0, y0, x1, y1, mask)
