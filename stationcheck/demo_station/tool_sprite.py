"""The handheld fastening tool seen from above, as a sprite.

Three kinds: ``inline`` (a straight driver, the demo tool), ``pistol`` (a shorter, bulkier body
with a handle and battery pack off to one side) and ``angle_head`` (a slim body whose head turns
the socket down into the screw, so the tip lies under a round head, not at a visible bit).

Local frame: the bit tip at (0, 0), the tool axis along +x towards the rear end cap. The two
keypoints are ``tip`` (the bit's end, or the head's centre) and ``rear`` (the centre of the end
cap); ``grip`` is where the hand holds it.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

import cv2
import numpy as np

from stationcheck.demo_station.shading import (
    CHROME,
    MATTE,
    RUBBER,
    STEEL,
    Canvas,
    Material,
    Sprite,
)

BGR = tuple[float, float, float]
ToolKind = Literal["inline", "pistol", "angle_head"]
TOOL_KINDS: tuple[ToolKind, ...] = ("inline", "pistol", "angle_head")
TIP_INSET_PX = 0.5  # the tip keypoint sits this far inside the bit's end
REAR_INSET_PX = 3.0  # the rear keypoint sits this far inside the end cap


@dataclass(frozen=True)
class ToolStyle:
    length_px: float = 168.0  # tip to rear at scale 1
    radius_px: float = 17.0
    bit_length_px: float = 26.0
    body_bgr: BGR = (62, 60, 58)
    accent_bgr: BGR = (40, 150, 215)
    grip_bgr: BGR = (38, 38, 40)
    cap_bgr: BGR = (45, 45, 48)
    cable_bgr: BGR = (30, 30, 32)
    cable_bend: float = 0.35  # how far the cable curves sideways (-1..1)
    has_cable: bool = True
    body_material: Material = MATTE
    kind: ToolKind = "inline"
    pack_bgr: BGR = (40, 40, 44)  # a pistol tool's battery pack

    def __post_init__(self) -> None:
        if self.kind not in TOOL_KINDS:
            raise ValueError(f"ToolStyle.kind must be one of {TOOL_KINDS}, got {self.kind!r}")
        if not 60.0 <= self.length_px <= 400.0:
            raise ValueError(f"ToolStyle.length_px must be in [60, 400], got {self.length_px}")
        if not 6.0 <= self.radius_px <= 40.0:
            raise ValueError(f"ToolStyle.radius_px must be in [6, 40], got {self.radius_px}")
        if not 4.0 <= self.bit_length_px <= 120.0:
            raise ValueError(
                f"ToolStyle.bit_length_px must be in [4, 120], got {self.bit_length_px}"
            )
        if not -1.0 <= self.cable_bend <= 1.0:
            raise ValueError(f"ToolStyle.cable_bend must be in [-1, 1], got {self.cable_bend}")
        if not isinstance(self.has_cable, bool):
            raise TypeError(f"ToolStyle.has_cable must be true or false, got {self.has_cable!r}")


DEMO_TOOL = ToolStyle()


def make_tool_sprite(style: ToolStyle = DEMO_TOOL) -> Sprite:
    """Draw the tool once, supersampled, with its keypoints."""
    length, radius, bit = style.length_px, style.radius_px, style.bit_length_px
    cable_len = 110.0 if style.has_cable else 0.0
    margin = 14.0
    side = 0.55 * length if style.kind == "pistol" else 0.0  # handle and pack off to one side
    width = int(length + cable_len + 2 * margin)
    height = int(2 * (radius + margin) + max(80.0 if style.has_cable else 0.0, 2.0 * side))
    canvas = Canvas(width, height, (margin, height / 2.0))
    tip, rear = (TIP_INSET_PX, 0.0), (length - REAR_INSET_PX, 0.0)
    if style.kind == "pistol":
        _draw_pistol_handle(canvas, style, length, radius)

    chuck_end = bit + 0.1 * length
    nose_end = chuck_end + 0.1 * length
    grip_start = nose_end + 0.12 * length
    grip_end = grip_start + 0.24 * length
    cap_start = length - 0.07 * length

    if style.has_cable:
        _draw_cable(canvas, style, length, cable_len)
    if style.kind == "angle_head":
        _draw_angle_head(canvas, style, bit, chuck_end, radius)
    else:
        _draw_bit_and_chuck(canvas, bit, chuck_end, radius)
    # nose cone and body
    r_nose = 0.62 * radius
    canvas.paint(
        canvas.polygon_mask(
            [
                (chuck_end - 1, -r_nose),
                (nose_end, -radius),
                (cap_start, -radius),
                (cap_start, radius),
                (nose_end, radius),
                (chuck_end - 1, r_nose),
            ]
        ),
        style.body_bgr,
        radius,
        style.body_material,
    )
    # accent ring behind the nose (direction switch collar)
    ring_x = nose_end + 0.06 * length
    canvas.paint(
        canvas.polygon_mask(
            [
                (ring_x, -radius - 0.5),
                (ring_x + 0.05 * length, -radius - 0.5),
                (ring_x + 0.05 * length, radius + 0.5),
                (ring_x, radius + 0.5),
            ]
        ),
        style.accent_bgr,
        radius,
        MATTE,
    )
    # rubber grip with ribs
    grip_r = radius * 1.03
    canvas.paint(
        canvas.polygon_mask(
            [(grip_start, -grip_r), (grip_end, -grip_r), (grip_end, grip_r), (grip_start, grip_r)]
        ),
        style.grip_bgr,
        grip_r,
        RUBBER,
    )
    for x in np.arange(grip_start + 4, grip_end - 2, 5.0):
        canvas.darken(canvas.capsule_mask((x, -grip_r * 0.85), (x, grip_r * 0.85), 1.4), 0.6)
    # push-to-start button on top of the body
    canvas.paint(
        canvas.ellipse_mask((grip_start - 0.06 * length, -0.2 * radius), (7, 4.5), 0),
        style.accent_bgr,
        4.0,
        MATTE,
    )
    # vent slots on the rear body
    for k in range(4):
        x = grip_end + 0.012 * length + 4.0 * k
        canvas.darken(canvas.capsule_mask((x, -0.55 * radius), (x, 0.55 * radius), 1.5), 0.35)
    # end cap, rounded
    cap_r = radius * 0.92
    canvas.paint(
        canvas.ellipse_mask((cap_start, 0), (length - cap_start, cap_r), 0),
        style.cap_bgr,
        cap_r,
        RUBBER,
    )
    canvas.paint(
        canvas.polygon_mask(
            [
                (cap_start - 4, -cap_r),
                (cap_start, -cap_r),
                (cap_start, cap_r),
                (cap_start - 4, cap_r),
            ]
        ),
        style.cap_bgr,
        cap_r,
        RUBBER,
    )
    return canvas.to_sprite(
        {"tip": tip, "rear": rear, "grip": ((grip_start + grip_end) / 2.0, 0.0)}
    )


def _draw_cable(canvas: Canvas, style: ToolStyle, length: float, cable_len: float) -> None:
    """Strain relief and a cable curving away from the end cap."""
    ts = np.linspace(0.0, 1.0, 24)
    xs = length - 2 + ts * cable_len
    ys = style.cable_bend * 60.0 * ts**2
    pts = np.stack([xs, ys], axis=1)
    mask = canvas.empty_mask()
    ss_pts = np.asarray([canvas.ss((float(x), float(y))) for x, y in pts], np.int32)
    cv2.polylines(mask, [ss_pts], False, 255, 8 * 3, cv2.LINE_8)
    canvas.paint(mask, style.cable_bgr, 4.0, RUBBER)
    relief = canvas.capsule_mask((length - 2, 0), (length + 14, ys[3]), 11)
    canvas.paint(relief, style.cap_bgr, 5.5, RUBBER)


def _draw_bit_and_chuck(canvas: Canvas, bit: float, chuck_end: float, radius: float) -> None:
    """A hex bit tapering to a cross point in a chrome quick-change chuck."""
    shank = 2.6 if radius > 15 else 2.2
    canvas.paint(
        canvas.polygon_mask(
            [(0, -0.9), (5, -shank), (bit + 2, -shank), (bit + 2, shank), (5, shank), (0, 0.9)]
        ),
        (185, 185, 190),
        shank,
        STEEL,
    )
    canvas.paint(
        canvas.polygon_mask([(bit, -5.5), (chuck_end, -7.5), (chuck_end, 7.5), (bit, 5.5)]),
        (200, 200, 205),
        7.0,
        CHROME,
    )
    canvas.darken(
        canvas.capsule_mask(
            (bit + 0.55 * (chuck_end - bit), -7), (bit + 0.55 * (chuck_end - bit), 7), 1.2
        ),
        0.45,
    )


def _draw_angle_head(
    canvas: Canvas, style: ToolStyle, bit: float, chuck_end: float, radius: float
) -> None:
    """A right-angle head: a round gear housing over the tip (the socket points down into the
    screw), joined to the body by a tapered neck."""
    head_r = max(9.0, 0.8 * radius)
    canvas.paint(
        canvas.polygon_mask(
            [
                (0, -0.55 * head_r),
                (chuck_end, -0.6 * radius),
                (chuck_end, 0.6 * radius),
                (0, 0.55 * head_r),
            ]
        ),
        (150, 150, 155),
        0.6 * radius,
        CHROME,
    )
    canvas.paint(canvas.circle_mask((0, 0), head_r), (170, 170, 175), head_r, STEEL)
    canvas.darken(canvas.ring_mask((0, 0), 0.55 * head_r, 0.4 * head_r), 0.55)
    canvas.paint(canvas.circle_mask((0, 0), 0.22 * head_r), style.accent_bgr, 3.0, MATTE)


def _draw_pistol_handle(canvas: Canvas, style: ToolStyle, length: float, radius: float) -> None:
    """A pistol tool's handle and battery pack, seen leaning out from under the body."""
    x = 0.62 * length
    reach = 0.5 * length
    canvas.paint(
        canvas.capsule_mask((x, 0), (x + 0.08 * length, reach), 1.5 * radius),
        style.grip_bgr,
        0.75 * radius,
        RUBBER,
    )
    canvas.paint(
        canvas.rounded_rect_mask(
            x - 0.2 * length,
            reach - 0.06 * length,
            x + 0.3 * length,
            reach + 0.12 * length,
            5.0,
        ),
        style.pack_bgr,
        0.09 * length,
        MATTE,
    )
