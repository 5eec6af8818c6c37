"""Domain randomisation: random tools, gloves, cameras and views for training frames.

Each draw is broad (three tool kinds, any size in a plausible range, colours over the whole hue
circle, gloves and sleeves of any colour, light from any side, zoom, tilt and rotation), so a
model trained on them meets a station's own look as one more variation. Draws that fall in a
held-out family (:mod:`~stationcheck.demo_station.held_out_looks`) are redrawn: figures measured
on those looks stay figures on looks the model never saw. Demo data only.
"""

from __future__ import annotations

import colorsys

import numpy as np

from stationcheck.demo_station.arm_sprite import SKIN_TONES, ArmStyle
from stationcheck.demo_station.camera import View
from stationcheck.demo_station.held_out_looks import is_held_out_arm, is_held_out_tool
from stationcheck.demo_station.shading import MATTE, RUBBER
from stationcheck.demo_station.tool_sprite import TOOL_KINDS, ToolStyle

BGR = tuple[float, float, float]
KIND_WEIGHTS = (0.5, 0.25, 0.25)  # inline, pistol, angle head
MAX_REDRAWS = 100


def random_colour(
    rng: np.random.Generator,
    saturation: tuple[float, float] = (0.0, 0.9),
    value: tuple[float, float] = (0.12, 0.9),
) -> BGR:
    """A colour anywhere on the hue circle (BGR, 0-255)."""
    r, g, b = colorsys.hsv_to_rgb(
        float(rng.uniform(0, 1)), float(rng.uniform(*saturation)), float(rng.uniform(*value))
    )
    return (round(255 * b, 1), round(255 * g, 1), round(255 * r, 1))


def _grey(rng: np.random.Generator, low: float, high: float) -> BGR:
    v = float(rng.uniform(low, high))
    return (v, v, v)


def _tool_once(rng: np.random.Generator) -> ToolStyle:
    kind = TOOL_KINDS[int(rng.choice(len(TOOL_KINDS), p=KIND_WEIGHTS))]
    length = float(rng.uniform(120, 200)) if kind != "pistol" else float(rng.uniform(110, 170))
    return ToolStyle(
        length_px=length,
        radius_px=float(rng.uniform(11, 22)) * (1.15 if kind == "pistol" else 1.0),
        bit_length_px=float(rng.uniform(14, 42)),
        body_bgr=random_colour(rng),
        accent_bgr=random_colour(rng, (0.3, 1.0), (0.4, 1.0)),
        grip_bgr=_grey(rng, 20, 70) if rng.random() < 0.7 else random_colour(rng),
        cap_bgr=_grey(rng, 25, 80),
        cable_bgr=_grey(rng, 20, 70) if rng.random() < 0.8 else random_colour(rng),
        cable_bend=float(rng.uniform(-1, 1)),
        has_cable=bool(rng.random() < (0.2 if kind == "pistol" else 0.6)),
        body_material=MATTE if rng.random() < 0.7 else RUBBER,
        kind=kind,
        pack_bgr=_grey(rng, 20, 90) if rng.random() < 0.6 else random_colour(rng),
    )


def random_tool(rng: np.random.Generator) -> ToolStyle:
    """A driver of some make, never one of the held-out tools or colours."""
    for _ in range(MAX_REDRAWS):
        tool = _tool_once(rng)
        if not is_held_out_tool(tool):
            return tool
    raise RuntimeError("random_tool: every draw fell in a held-out family")


def random_arm(rng: np.random.Generator) -> ArmStyle:
    """An operator's hand and sleeve: bare or gloved (any colour but the held-out glove's)."""
    for _ in range(MAX_REDRAWS):
        glove = random_colour(rng, (0.0, 0.9), (0.15, 0.95)) if rng.random() < 0.45 else None
        arm = ArmStyle(
            skin_bgr=SKIN_TONES[int(rng.integers(len(SKIN_TONES)))],
            sleeve_bgr=random_colour(rng, (0.0, 0.8), (0.1, 0.8)),
            glove_bgr=glove,
            sleeve_start_px=float(rng.uniform(20, 120)),
            hand_scale=float(rng.uniform(0.88, 1.14)),
        )
        if not is_held_out_arm(arm):
            return arm
    raise RuntimeError("random_arm: every draw fell in a held-out family")


def random_view(rng: np.random.Generator) -> View:
    """Another mounting of the camera over the same bench: small zoom, tilt and roll."""
    return View(
        zoom=float(rng.uniform(0.9, 1.1)),
        tilt_deg=round(float(rng.normal(0.0, 6.0)), 2),
        rot_deg=float(rng.uniform(-3.0, 3.0)),
    )


def random_light_from(rng: np.random.Generator) -> tuple[float, float]:
    """Where the main lamp sits, as a fraction of the frame (may lie outside it)."""
    return (float(rng.uniform(-0.3, 1.3)), float(rng.uniform(-0.3, 1.3)))
