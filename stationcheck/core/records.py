"""Records handed between pipeline stages. Small, frozen, validated on construction."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt


@dataclass(frozen=True)
class Frame:
    """One camera image. ``t_s`` is the capture time in seconds (monotonic for live cameras,
    ``index / fps`` for video files); the core measures dwell and grace from it."""

    index: int
    t_s: float
    image: npt.NDArray[np.uint8]  # H x W x 3, BGR (OpenCV order)

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
