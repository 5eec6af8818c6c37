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
# Named mixes of the demo renderer's frames. "randomised": the default above (4 in 10 station
# frames show another station's tool). "own-tool": 3 in 10 frames more of the demo station with
# its own tool, so about half of all frames show it, as before tools were randomised; every
# randomised kind of frame stays in the mix. "mostly-own-tool": about 7 in 10 frames show the
# station's own tool, for a last, low-rate stage after a randomised one.
DEMO_MIXES: dict[str, tuple[tuple[str, float], ...]] = {
    "randomised": DEMO_SAMPLE_FUNCTIONS,
    "own-tool": (
        ("render_training_sample", 0.35),
        ("render_station_sample", 0.35),
        ("render_own_station_sample", 0.3),
    ),
    "mostly-own-tool": (
        ("render_training_sample", 0.2),
        ("render_station_sample", 0.2),
        ("render_own_station_sample", 0.6),
    ),
}


def coco_sources(annotations: Path, image_dir: Path, seed: int) -> tuple[FrameSource, FrameSource]:
    """(training, held-out) parts of one COCO keypoint dataset."""
    return CocoSource(annotations, image_dir).split(HOLDOUT_FRACTION, seed)


def demo_moving_sample(module: ModuleType) -> MovingSampleFn | None:
    """The demo renderer's frames of fast moves with their known step (for the motion lead),
    or None when the renderer offers none. ``module`` is the renderer's training module, passed
    in by the command (the demo sits above training in the layers)."""
    function: MovingSampleFn | None = getattr(module, "render_moving_sample", None)
    return function


def demo_sources(module: ModuleType, mix: str = "randomised") -> tuple[FrameSource, FrameSource]:
    """The demo renderer's training frames (``module``: the renderer's training module, passed
    in by the command; ``mix``: a name in :data:`DEMO_MIXES`); the held-out part is the same
    generator on its own random stream (it is infinite, so nothing is shared)."""
    functions = demo_sample_functions(module, mix)
    logger.info("demo training frames from %s", [f.__name__ for f, _ in functions])
    source = FunctionSource(functions)
    return source, source


def demo_sample_functions(
    module: ModuleType, mix: str = "randomised"
) -> list[tuple[SampleFn, float]]:
    """The demo renderer's sample functions of the named mix with their share (weights sum
    to 1)."""
    if mix not in DEMO_MIXES:
        raise InputFileError(f"unknown demo frame mix {mix!r}; one of {sorted(DEMO_MIXES)}")
    functions: list[tuple[SampleFn, float]] = []
    for name, weight in DEMO_MIXES[mix]:
        function = getattr(module, name, None)
        if function is not None:
            functions.append((function, weight))
    if not functions:
        raise InputFileError("stationcheck.demo_station.training offers no sample function")
    return functions
