"""Records handed between pipeline stages. Small, frozen, validated on construction."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

from stationcheck.core.validation import (
    require_at_least,
    require_bool,
    require_finite,
    require_point,
)


@dataclass(frozen=True)
class Frame:
    """One camera image. ``t_s`` is the capture time in seconds (monotonic for live cameras,
    ``index / fps`` for video files); the core measures dwell and grace from it."""

    index: int
    t_s: float
    image: npt.NDArray[np.uint8]  # H x W x 3, BGR (OpenCV order)
    source_t_s: float | None = None  # the source's own timestamp, when it gives one

    def __post_init__(self) -> None:
        if self.index < 0:
            raise ValueError(f"Frame.index must be >= 0, got {self.index}")
        if not math.isfinite(self.t_s):
            raise ValueError(f"Frame.t_s must be finite, got {self.t_s}")
        shape = getattr(self.image, "shape", None)
        if shape is None or len(shape) != 3 or shape[2] != 3 or self.image.dtype != np.uint8:
            raise ValueError(
                "Frame.image must be an H x W x 3 uint8 array, got "
                f"shape {shape} dtype {getattr(self.image, 'dtype', None)}"
            )

    @property
    def width_px(self) -> int:
        return int(self.image.shape[1])

    @property
    def height_px(self) -> int:
        return int(self.image.shape[0])


@dataclass(frozen=True)
class Keypoint:
    """One keypoint in frame pixels. ``score`` is in [0, 1]; the detector documents its meaning."""

    name: str
    x_px: float
    y_px: float
    score: float

    def __post_init__(self) -> None:
        if not self.name:
            raise ValueError("Keypoint.name must not be empty")
        for field in ("x_px", "y_px", "score"):
            value = getattr(self, field)
            if not math.isfinite(value):
                raise ValueError(f"Keypoint.{field} must be finite, got {value}")
        if not 0.0 <= self.score <= 1.0:
            raise ValueError(f"Keypoint.score must be in [0, 1], got {self.score}")


@dataclass(frozen=True)
class Keypoints:
    """The detector's answer for one frame."""

    frame_index: int
    t_s: float
    points: tuple[Keypoint, ...]

    def get(self, name: str) -> Keypoint | None:
        for point in self.points:
            if point.name == name:
                return point
        return None


@dataclass(frozen=True)
class ToolPose:
    """The tracker's belief about the tool in one frame.

    ``tip_px``/``rear_px`` are smoothed positions (``measured_tip_px`` is the frame's own tip
    when seen, which a zone is left by as soon as it is); during the lost-track grace period they hold
    the last smoothed position and ``visible`` stays true while ``seen`` is false. After the grace
    period ``visible`` is false and both positions are None.
    """

    t_s: float
    frame_index: int
    tip_px: tuple[float, float] | None
    rear_px: tuple[float, float] | None
    visible: bool
    seen: bool
    score: float
    track_age_s: float = 0.0
    unseen_ms: float = 0.0
    measured_tip_px: tuple[float, float] | None = None  # this frame's tip before smoothing

    def __post_init__(self) -> None:
        require_finite("ToolPose", "t_s", self.t_s)
        if self.frame_index < 0:
            raise ValueError(f"ToolPose.frame_index must be >= 0, got {self.frame_index}")
        require_point("ToolPose", "tip_px", self.tip_px)
        require_point("ToolPose", "rear_px", self.rear_px)
        require_bool("ToolPose", "visible", self.visible)
        require_bool("ToolPose", "seen", self.seen)
        if self.visible and self.tip_px is None:
            raise ValueError("ToolPose.tip_px must be set when visible is true, got None")
        if self.seen and not self.visible:
            raise ValueError("ToolPose.visible must be true when seen is true, got false")
        require_finite("ToolPose", "score", self.score)
        if not 0.0 <= self.score <= 1.0:
            raise ValueError(f"ToolPose.score must be in [0, 1], got {self.score}")
        require_at_least("ToolPose", "track_age_s", self.track_age_s, 0.0)
        require_at_least("ToolPose", "unseen_ms", self.unseen_ms, 0.0)
