"""Geometry of the invented demo station (demo data): a pump end-cover station seen from above.

One place for the reference-frame coordinates that the renderer draws and the demo config's
zones are drawn on. Pixel coordinates are in the 640x480 reference frame, x right, y down; the
operator stands at the bottom edge. Fastener positions are numbered clockwise on screen starting
at the top (12 o'clock), as bolt patterns are numbered.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

FRAME_WIDTH_PX = 640
FRAME_HEIGHT_PX = 480
FPS = 30.0

# Fixture and cover
COVER_CENTRE_PX = (320.0, 215.0)
COVER_RADIUS_PX = 92.0
BOLT_CIRCLE_RADIUS_PX = 68.0
BOLT_COUNT = 6
BOLT_START_ANGLE_DEG = -90.0  # 12 o'clock; angles grow clockwise on screen (y down)
SCREW_HEAD_RADIUS_PX = 8.0
FASTENER_ZONE_HALF_SIZE_PX = 17.0  # zone is a square-ish octagon of this half size

# Part bins (axis-aligned rectangles: x0, y0, x1, y1)
LEFT_BIN_PX = (22.0, 150.0, 150.0, 330.0)  # gaskets
RIGHT_BIN_PX = (490.0, 150.0, 618.0, 330.0)  # covers

# Fixture locking pin: a slide pin on the fixture's front right; the check zone covers its slot
LOCKING_PIN_ZONE_PX = (418.0, 318.0, 470.0, 350.0)


@dataclass(frozen=True)
class ScrewPosition:
    number: int  # 1-based, clockwise from 12 o'clock
    x_px: float
    y_px: float


def screw_positions() -> tuple[ScrewPosition, ...]:
    """The screw centres on the bolt circle, numbered clockwise from the top."""
    cx, cy = COVER_CENTRE_PX
    out = []
    for i in range(BOLT_COUNT):
        a = math.radians(BOLT_START_ANGLE_DEG + 360.0 * i / BOLT_COUNT)
        out.append(
            ScrewPosition(
                i + 1,
                cx + BOLT_CIRCLE_RADIUS_PX * math.cos(a),
                cy + BOLT_CIRCLE_RADIUS_PX * math.sin(a),
            )
        )
    return tuple(out)


def octagon_px(cx: float, cy: float, half_size_px: float) -> list[tuple[float, float]]:
    """A regular octagon around a centre, clockwise on screen, rounded to 0.1 px."""
    r = half_size_px / math.cos(math.pi / 8)
    return [
        (
            round(cx + r * math.cos(math.radians(22.5 + 45 * k)), 1),
            round(cy + r * math.sin(math.radians(22.5 + 45 * k)), 1),
        )
        for k in range(8)
    ]


def rectangle_px(box: tuple[float, float, float, float]) -> list[tuple[float, float]]:
    x0, y0, x1, y1 = box
    return [(x0, y0), (x1, y0), (x1, y1), (x0, y1)]
