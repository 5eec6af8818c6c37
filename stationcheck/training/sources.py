"""Where training frames come from: the demo renderer or a user's COCO keypoint dataset."""

from __future__ import annotations

import logging
from pathlib import Path
from types import ModuleType

from stationcheck.errors import InputFileError
from stationcheck.training.samples import (
    CocoSource,
    FrameSource,
    FunctionSource,
    MovingSampleFn,
    SampleFn,
)

logger = logging.getLogger(__name__)

HOLDOUT_FRACTION = 0.1
# Demo renderer sample functions and their share of the training frames: random scenes (tool
# anywhere, any angle, distractors, sometimes no tool) and frames of the demo station itself.
DEMO_SAMPLE_FUNCTIONS = (
    ("render_training_sample", 0.5),
    ("render_station_sample", 0.5),
)


def coco_sources(annotations: Path, image_dir: Path, seed: int) -> tuple[FrameSource, FrameSource]:
    """(training, held-out) parts of one COCO keypoint dataset."""
    return CocoSource(annotations, image_dir).split(HOLDOUT_FRACTION, seed)


def demo_moving_sample(module: ModuleType) -> MovingSampleFn | None:
    """The demo renderer's frames of fast moves with their known step (for the motion lead),
    or None when the renderer offers none. ``module`` is the renderer's training module, passed
    in by the command (the demo sits above training in the layers)."""
    function: MovingSampleFn | None = getattr(module, "render_moving_sample", None)
    return function


def demo_sources(module: ModuleType) -> tuple[FrameSource, FrameSource]:
    """The demo renderer's training frames (``module``: the renderer's training module, passed
    in by the command); the held-out part is the same generator on its own random stream (it is
    infinite, so nothing is shared)."""
    functions = demo_sample_functions(module)
    logger.info("demo training frames from %s", [f.__name__ for f, _ in functions])
    source = FunctionSource(functions)
    return source, source


def demo_sample_functions(module: ModuleType) -> list[tuple[SampleFn, float]]:
    """The demo renderer's sample functions with their share (weights sum to 1)."""
    functions: list[tuple[SampleFn, float]] = []
    for name, weight in DEMO_SAMPLE_FUNCTIONS:
        function = getattr(module, name, None)
        if function is not None:
            functions.append((function, weight))
    if not functions:
        raise InputFileError("stationcheck.demo_station.training offers no sample function")
    return functions
