"""A :class:`~stationcheck.vision.detector.KeypointDetector` that answers from a table of
keypoints by frame index instead of running a model.

Replays with ``--detector truth`` use it on the sample video's ground truth (the decisions and
the glue without the model), and tests of the tracker, zones and sequencer so they need no
model file. Frames it has no answer for get every keypoint
at score 0 (the tool is not seen). The tip hints the caller hands in are kept for inspection,
only the newest ``hints_kept`` of them, so a long replay holds no more than that.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Iterable, Mapping

from stationcheck.core.records import Frame, Keypoint, Keypoints

PointTable = Mapping[int, Mapping[str, tuple[float, float, float]]]
HINTS_KEPT = 64


class TableKeypointDetector:
    """Answers ``detect`` from a table ``{frame_index: {name: (x_px, y_px, score)}}``."""

    def __init__(
        self,
        table: PointTable,
        keypoint_names: Iterable[str] = ("tip", "rear"),
        *,
        hints_kept: int = HINTS_KEPT,
    ) -> None:
        if hints_kept < 1:
            raise ValueError(f"hints_kept must be >= 1, got {hints_kept}")
        self.keypoint_names = tuple(keypoint_names)
        self._table = table
        self.hints: deque[tuple[float, float] | None] = deque(maxlen=hints_kept)

    def detect(self, frame: Frame, tip_hint_px: tuple[float, float] | None = None) -> Keypoints:
        self.hints.append(tip_hint_px)
        row = self._table.get(frame.index, {})
        points = []
        for name in self.keypoint_names:
            x_px, y_px, score = row.get(name, (0.0, 0.0, 0.0))
            points.append(Keypoint(name, x_px, y_px, score))
        return Keypoints(frame.index, frame.t_s, tuple(points))
