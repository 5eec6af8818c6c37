"""The held-out tools, gloves and looks stay out of the renderer's training randomisation."""

from __future__ import annotations

import colorsys

import numpy as np

from stationcheck.demo_station.arm_sprite import DEMO_ARM
from stationcheck.demo_station.held_out_looks import (
    HELD_OUT_HUE_BAND,
    HELD_OUT_LOOKS,
    HELD_OUT_TOOL,
    UNSEEN_ARM,
    UNSEEN_TOOL,
    is_held_out_arm,
    is_held_out_colour,
    is_held_out_tool,
    is_unseen_family,
)
from stationcheck.demo_station.randomise import random_arm, random_tool, random_view
from stationcheck.demo_station.rig import OperatorRig
from stationcheck.demo_station.tool_sprite import DEMO_TOOL, TOOL_KINDS


def test_random_training_tools_and_gloves_never_fall_in_the_unseen_family() -> None:
    rng = np.random.default_rng(11)
    drawn = [(random_tool(rng), random_arm(rng)) for _ in range(3000)]
    assert not any(is_unseen_family(tool, arm) for tool, arm in drawn)
    assert not any(is_held_out_tool(tool) or is_held_out_arm(arm) for tool, arm in drawn)
    assert not is_unseen_family(DEMO_TOOL, DEMO_ARM)
    # the draws are broad: every kind, bodies all round the hue circle, gloved and bare hands
    assert {tool.kind for tool, _ in drawn} == set(TOOL_KINDS)
    hues = [
        colorsys.rgb_to_hsv(*(c / 255.0 for c in reversed(tool.body_bgr)))[0] for tool, _ in drawn
    ]
    assert np.histogram(hues, bins=10, range=(0, 1))[0].min() > 0
    assert 0.3 < np.mean([arm.glove_bgr is not None for _, arm in drawn]) < 0.6


def test_the_held_out_tool_colours_are_a_band_training_never_draws() -> None:
    assert is_held_out_colour(HELD_OUT_TOOL.body_bgr)
    assert not is_held_out_colour(DEMO_TOOL.body_bgr)
    rng = np.random.default_rng(5)
    bodies = [random_tool(rng).body_bgr for _ in range(3000)]
    low, high = HELD_OUT_HUE_BAND
    for b, g, r in bodies:
        hue, saturation, value = colorsys.rgb_to_hsv(r / 255.0, g / 255.0, b / 255.0)
        assert not (low <= hue <= high and saturation >= 0.3 and value >= 0.25)


def test_the_unseen_tool_is_in_its_family_and_can_be_drawn() -> None:
    assert is_unseen_family(UNSEEN_TOOL, UNSEEN_ARM)
    assert is_held_out_tool(UNSEEN_TOOL) and is_held_out_arm(UNSEEN_ARM)
    rig = OperatorRig(UNSEEN_TOOL, UNSEEN_ARM)
    assert rig.tool.alpha.any()


def test_training_views_stay_short_of_the_held_out_zoom_and_roll() -> None:
    rng = np.random.default_rng(3)
    views = [random_view(rng) for _ in range(2000)]
    held = {look.name: look.view for look in HELD_OUT_LOOKS}
    assert max(v.zoom for v in views) < held["zoom x1.15"].zoom
    assert max(abs(v.rot_deg) for v in views) < held["rotation 4 deg"].rot_deg
