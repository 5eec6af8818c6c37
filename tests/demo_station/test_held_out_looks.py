"""The held-out tool stays out of the renderer's random training tools and gloves."""

from __future__ import annotations

import numpy as np

from stationcheck.demo_station.arm_sprite import DEMO_ARM, random_arm_style
from stationcheck.demo_station.held_out_looks import UNSEEN_ARM, UNSEEN_TOOL, is_unseen_family
from stationcheck.demo_station.rig import OperatorRig
from stationcheck.demo_station.tool_sprite import DEMO_TOOL, random_tool_style


def test_random_training_tools_and_gloves_never_fall_in_the_unseen_family() -> None:
    rng = np.random.default_rng(11)
    drawn = [(random_tool_style(rng), random_arm_style(rng)) for _ in range(3000)]
    assert not any(is_unseen_family(tool, arm) for tool, arm in drawn)
    assert not is_unseen_family(DEMO_TOOL, DEMO_ARM)


def test_the_unseen_tool_is_in_its_family_and_can_be_drawn() -> None:
    assert is_unseen_family(UNSEEN_TOOL, UNSEEN_ARM)
    rig = OperatorRig(UNSEEN_TOOL, UNSEEN_ARM)
    assert rig.tool.alpha.any()
