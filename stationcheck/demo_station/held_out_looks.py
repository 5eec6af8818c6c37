"""Looks kept out of training: the renderer never draws them into training frames, so figures
measured on them say how a model does on a station it has not seen. Demo data only.

``UNSEEN_TOOL`` and ``UNSEEN_ARM`` are another make of driver (longer, slimmer, purple, no cable)
in an orange glove: the test case for adapting a model to a station's own tool. Training's
random tools and gloves must stay out of this family (:func:`is_unseen_family`).

``HELD_OUT_LOOKS`` are the camera pictures ``stationcheck eval --looks`` measures a model on: a
dim lamp, a noisy sensor, hard JPEG compression, a zoomed and a rolled camera, the demo tool
painted in colours training never draws (:data:`HELD_OUT_TOOL`, body hue in
:data:`HELD_OUT_HUE_BAND`), and the unseen tool.
"""

from __future__ import annotations

import colorsys
from dataclasses import dataclass, field, replace

from stationcheck.demo_station.arm_sprite import DEMO_ARM, ArmStyle
from stationcheck.demo_station.camera import View
from stationcheck.demo_station.look import Look
from stationcheck.demo_station.tool_sprite import DEMO_TOOL, ToolStyle

BGR = tuple[float, float, float]

UNSEEN_TOOL = ToolStyle(
    length_px=236.0,
    radius_px=12.0,
    bit_length_px=46.0,
    body_bgr=(150.0, 45.0, 140.0),
    accent_bgr=(230.0, 230.0, 60.0),
    grip_bgr=(20.0, 20.0, 20.0),
    cap_bgr=(25.0, 25.0, 28.0),
    has_cable=False,
)
UNSEEN_ARM = ArmStyle(glove_bgr=(35.0, 110.0, 235.0), sleeve_bgr=(70.0, 70.0, 70.0))

# Training tools longer than this, or with a purple body, would be the unseen tool's family.
UNSEEN_MIN_LENGTH_PX = 215.0

# Teal to cyan bodies (hue as a fraction of the circle, saturated and not too dark) are never
# drawn in training: the demo tool painted so is the "other tool colours" look.
HELD_OUT_HUE_BAND = (0.44, 0.54)
HELD_OUT_MIN_SATURATION = 0.3
HELD_OUT_MIN_VALUE = 0.25
HELD_OUT_TOOL = replace(DEMO_TOOL, body_bgr=(170.0, 150.0, 20.0), accent_bgr=(40.0, 200.0, 60.0))
# Gloves of the unseen glove's orange (hue within this of it, saturated) are never drawn.
GLOVE_HUE_MARGIN = 0.05


def _hsv(bgr: BGR) -> tuple[float, float, float]:
    b, g, r = (c / 255.0 for c in bgr)
    return colorsys.rgb_to_hsv(r, g, b)


def is_unseen_family(tool: ToolStyle, arm: ArmStyle | None = None) -> bool:
    """True when a tool (or glove) is too close to the held-out one to be trained on."""
    b, g, r = tool.body_bgr
    purple = b > 100 and r > 100 and g < 0.6 * min(b, r)
    orange_glove = arm is not None and arm.glove_bgr == UNSEEN_ARM.glove_bgr
    return tool.length_px > UNSEEN_MIN_LENGTH_PX or purple or orange_glove


def is_held_out_colour(bgr: BGR) -> bool:
    """A body colour in the held-out teal band."""
    hue, saturation, value = _hsv(bgr)
    return (
        HELD_OUT_HUE_BAND[0] <= hue <= HELD_OUT_HUE_BAND[1]
        and saturation >= HELD_OUT_MIN_SATURATION
        and value >= HELD_OUT_MIN_VALUE
    )


def is_held_out_tool(tool: ToolStyle) -> bool:
    """The unseen tool's family or a body in the held-out colours."""
    return is_unseen_family(tool) or is_held_out_colour(tool.body_bgr)


def is_held_out_arm(arm: ArmStyle) -> bool:
    """A glove of the unseen glove's orange."""
    if arm.glove_bgr is None or UNSEEN_ARM.glove_bgr is None:
        return False
    hue, saturation, _ = _hsv(arm.glove_bgr)
    unseen_hue, _, _ = _hsv(UNSEEN_ARM.glove_bgr)
    near = min(abs(hue - unseen_hue), 1.0 - abs(hue - unseen_hue)) <= GLOVE_HUE_MARGIN
    return arm.glove_bgr == UNSEEN_ARM.glove_bgr or (near and saturation >= 0.5)


@dataclass(frozen=True)
class HeldOutLook:
    """One held-out camera picture: the look, the view and the operator's tool and glove.
    ``target``: whether the bundled model is held to the accuracy target on it (the unseen
    tool is reported, but adapting to it is what a station's own fine-tuning is for)."""

    name: str
    look: Look = field(default_factory=Look)
    view: View = field(default_factory=View)
    tool: ToolStyle = DEMO_TOOL
    arm: ArmStyle = DEMO_ARM
    target: bool = True


HELD_OUT_LOOKS: tuple[HeldOutLook, ...] = (
    HeldOutLook("light x0.45", look=Look(gain=0.45)),
    HeldOutLook("sensor noise 9", look=Look(noise_sigma=9.0)),
    HeldOutLook("JPEG 15", look=Look(jpeg_quality=15)),
    HeldOutLook("zoom x1.15", view=View(zoom=1.15)),
    HeldOutLook("rotation 4 deg", view=View(rot_deg=4.0)),
    HeldOutLook("teal tool", tool=HELD_OUT_TOOL),
    HeldOutLook("unseen tool", tool=UNSEEN_TOOL, arm=UNSEEN_ARM, target=False),
)
