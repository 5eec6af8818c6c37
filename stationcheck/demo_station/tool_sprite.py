"""The handheld fastening tool (an inline electric driver) seen from above, as a sprite.

Local frame: the bit tip at (0, 0), the tool axis along +x towards the rear end cap. The two
keypoints are ``tip`` (the bit's end) and ``rear`` (the centre of the end cap); ``grip`` is where
the hand holds it.
"""

from __future__ import annotations

from dataclasses import dataclass

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

    def __post_init__(self) -> None:
        if not 60.0 <= self.length_px <= 400.0:
            raise ValueError(f"ToolStyle.length_px must be in [60, 400], got {self.length_px}")
        if not 6.0 <= self.radius_px <= 40.0:
            raise ValueError(f"ToolStyle.radius_px must be in [6, 40], got {self.radius_px}")


DEMO_TOOL = ToolStyle()


def random_tool_style(rng: np.random.Generator) -> ToolStyle:
    """A plausible driver of another make: size, colours, cable or cordless."""
    bodies = [
        (62, 60, 58),
        (30, 30, 32),
        (150, 90, 40),
        (40, 40, 150),
        (50, 120, 60),
        (40, 170, 200),
        (170, 170, 165),
        (20, 90, 200),
        (90, 90, 90),
    ]
    accents = [
        (40, 150, 215),
        (60, 60, 200),
        (200, 200, 200),
        (40, 200, 240),
        (150, 80, 30),
        (30, 30, 30),
    ]
    body = bodies[int(rng.integers(len(bodies)))]
    jitter = rng.uniform(0.8, 1.2, 3)
    return ToolStyle(
        length_px=float(rng.uniform(140, 200)),
        radius_px=float(rng.uniform(13, 21)),
        bit_length_px=float(rng.uniform(16, 40)),
        body_bgr=(
            min(255.0, body[0] * jitter[0]),
            min(255.0, body[1] * jitter[1]),
            min(255.0, body[2] * jitter[2]),
        ),
        accent_bgr=accents[int(rng.integers(len(accents)))],
        grip_bgr=_grey(rng, 25, 60),
        cap_bgr=_grey(rng, 30, 70),
        cable_bgr=_grey(rng, 20, 60),
        cable_bend=float(rng.uniform(-1, 1)),
        has_cable=bool(rng.random() < 0.7),
        body_material=MATTE if rng.random() < 0.7 else RUBBER,
    )


def _grey(rng: np.random.Generator, low: float, high: float) -> BGR:
    v = float(rng.uniform(low, high))
    return (v, v, v)


def make_tool_sprite(style: ToolStyle = DEMO_TOOL) -> Sprite:
    """Draw the tool once, supersampled, with its keypoints."""
    length, radius, bit = style.length_px, style.radius_px, style.bit_length_px
    cable_len = 110.0 if style.has_cable else 0.0
    margin = 14.0
    width = int(length + cable_len + 2 * margin)
    height = int(2 * (radius + margin) + (80 if style.has_cable else 0))
    canvas = Canvas(width, height, (margin, height / 2.0))
    tip, rear = (TIP_INSET_PX, 0.0), (length - REAR_INSET_PX, 0.0)

    chuck_end = bit + 0.1 * length
    nose_end = chuck_end + 0.1 * length
    grip_start = nose_end + 0.12 * length
    grip_end = grip_start + 0.24 * length
    cap_start = length - 0.07 * length

    if style.has_cable:
        _draw_cable(canvas, style, length, cable_len)
    # bit: hex shank tapering to a cross point
    shank = 2.6 if radius > 15 else 2.2
    canvas.paint(
        canvas.polygon_mask(
            [(0, -0.9), (5, -shank), (bit + 2, -shank), (bit + 2, shank), (5, shank), (0, 0.9)]
        ),
        (185, 185, 190),
        shank,
        STEEL,
    )
    # quick-change chuck: chrome sleeve with a groove
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
