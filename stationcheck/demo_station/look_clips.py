"""Short rendered clips of the held-out looks with their ground truth, for measuring a model on
camera pictures it was never trained on (demo data).

Each look renders the same scene script (``sample_video/look_scenes/model_looks.yaml``: one unit,
picks, six screws, the tool out of view for a while) with the look's camera picture, mounting,
tool and glove. The truth comes from the plan, through the same camera and view as the pixels.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import replace
from pathlib import Path

import numpy as np

from stationcheck.config import load_config
from stationcheck.core.records import Frame
from stationcheck.demo_station.files import DEMO_CONFIG, REPO_ROOT
from stationcheck.demo_station.held_out_looks import HeldOutLook
from stationcheck.demo_station.sample_video import (
    FrameRenderer,
    Production,
    plan_production,
    script_limits,
)
from stationcheck.demo_station.script import load_script
from stationcheck.evaluation.truth import LabelledFrame

LOOKS_SCENE = REPO_ROOT / "sample_video" / "look_scenes" / "model_looks.yaml"


def look_production(
    look: HeldOutLook, scene: Path = LOOKS_SCENE, config_path: Path = DEMO_CONFIG
) -> Production:
    """The scene planned with the look's camera picture, tool, glove and view (no pixels)."""
    plan = load_config(config_path).to_plan()
    script = load_script(scene, script_limits(plan))
    knobs = replace(script.knobs, tool=look.tool, arm=look.arm, view=look.view)
    return plan_production(replace(script, look=look.look, knobs=knobs), plan)


def look_clip(look: HeldOutLook, max_frames: int | None = None) -> Iterator[LabelledFrame]:
    """The look's frames with their tip and rear truth rows (x, y, COCO v)."""
    production = look_production(look)
    renderer = FrameRenderer(production)
    count = len(production.rows)
    if max_frames is not None:
        count = min(count, max_frames)
    for row in production.rows[:count]:
        truth = np.array(
            [
                [row.tip_x_px, row.tip_y_px, row.tip_v],
                [row.rear_x_px, row.rear_y_px, row.rear_v],
            ],
            np.float64,
        )
        image = renderer.render(row.frame_index)
        yield LabelledFrame(Frame(row.frame_index, row.t_s, image), truth)
