"""Looks kept out of training: the renderer never draws them into training frames, so figures
measured on them say how a model does on a station it has not seen. Demo data only.

``UNSEEN_TOOL`` and ``UNSEEN_ARM`` are another make of driver (longer, slimmer, purple, no cable)
in an orange glove: the test case for adapting a model to a station's own tool. Training's
random tools and gloves must stay out of this family (:func:`is_unseen_family`).
"""

from __future__ import annotations

from stationcheck.demo_station.arm_sprite import ArmStyle
from stationcheck.demo_station.tool_sprite import ToolStyle

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


def is_unseen_family(tool: ToolStyle, arm: ArmStyle | None = None) -> bool:
    """True when a tool (or glove) is too close to the held-out one to be trained on."""
    b, g, r = tool.body_bgr
    purple = b > 100 and r > 100 and g < 0.6 * min(b, r)
    orange_glove = arm is not None and arm.glove_bgr == UNSEEN_ARM.glove_bgr
    return tool.length_px > UNSEEN_MIN_LENGTH_PX or purple or orange_glove
