"""One frame's label: where the tool's tip and rear are, or that the tool is not visible."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Literal

KEYPOINT_NAMES = ("tip", "rear")
LabelSource = Literal["clicked", "propagated"]
SOURCES: tuple[LabelSource, ...] = ("clicked", "propagated")

Point = tuple[float, float]


@dataclass(frozen=True)
class FrameLabel:
    """``tip`` None means the tool is not visible in the frame (then ``rear`` is None too);
    ``rear`` None with a tip means the rear is not labelled (out of the frame or covered)."""

    frame_index: int
    tip: Point | None
    rear: Point | None
    source: LabelSource

    def __post_init__(self) -> None:
        if self.frame_index < 0:
            raise ValueError(f"FrameLabel.frame_index must be >= 0, got {self.frame_index}")
        if self.source not in SOURCES:
            raise ValueError(f"FrameLabel.source must be one of {SOURCES}, got {self.source!r}")
        if self.tip is None and self.rear is not None:
            raise ValueError("FrameLabel: a rear without a tip (mark the tool not visible)")
        for name in ("tip", "rear"):
            point = getattr(self, name)
            if point is not None and not all(math.isfinite(v) for v in point):
                raise ValueError(f"FrameLabel.{name} must be finite, got {point}")

    @property
    def visible(self) -> bool:
        return self.tip is not None

    def to_json(self) -> dict[str, Any]:
        return {
            "frame_index": self.frame_index,
            "tip": None if self.tip is None else [round(v, 2) for v in self.tip],
            "rear": None if self.rear is None else [round(v, 2) for v in self.rear],
            "source": self.source,
        }

    @classmethod
    def from_json(cls, doc: Any) -> FrameLabel:
        """Raises ValueError or TypeError naming what is wrong."""
        if not isinstance(doc, dict):
            raise TypeError("a label is an object with frame_index, tip, rear, source")
        index = doc.get("frame_index")
        if not isinstance(index, int) or isinstance(index, bool):
            raise TypeError(f"frame_index must be a whole number, got {index!r}")
        return cls(
            index,
            _point(doc.get("tip"), "tip"),
            _point(doc.get("rear"), "rear"),
            doc.get("source", "clicked"),
        )


def _point(value: Any, name: str) -> Point | None:
    if value is None:
        return None
    if (
        not isinstance(value, list | tuple)
        or len(value) != 2
        or not all(isinstance(v, int | float) and not isinstance(v, bool) for v in value)
    ):
        raise ValueError(f"{name} must be [x, y] in pixels or null, got {value!r}")
    return (float(value[0]), float(value[1]))
