"""Geometry of the invented demo station (demo data): a pump end-cover station seen from above.

One place for the reference-frame coordinates that the renderer draws and the demo config's
zones are drawn on. Pixel coordinates are in the 640x480 reference frame, x right, y down; the
operator stands at the bottom edge. Fastener positions are numbered clockwise on screen starting
at the top (12 o'clock), as bolt patterns are numbered.
"""

from __future__ import annotations

from dataclasses import dataclass

from stationcheck.core.bolt_pattern import bolt_centres_px

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
FASTENER_ZONE_HALF_SIZE_PX = 17.0  # fastener zones are octagons 34 px across their flats

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
    centres = bolt_centres_px(
        COVER_CENTRE_PX, BOLT_CIRCLE_RADIUS_PX, BOLT_COUNT, BOLT_START_ANGLE_DEG
    )
    return tuple(ScrewPosition(i + 1, x, y) for i, (x, y) in enumerate(centres))
