"""Labelling the station's own tool: frames proposed for a click, clicks carried along the
video by optical flow, and the station's COCO keypoint dataset.

Nothing here knows the web: the setup screen's Label tab calls these functions, and so do the
tests and the benchmark. See ``docs/labelling.md``.
"""

from __future__ import annotations

from stationcheck.labels.records import KEYPOINT_NAMES, FrameLabel, LabelSource, Point

__all__ = ["KEYPOINT_NAMES", "FrameLabel", "LabelSource", "Point"]
