"""An in-memory :class:`~stationcheck.vision.detector.KeypointDetector` for tests of other parts.

It replays stored answers by frame index (e.g. the sample video's ground truth), so tracker,
zone and sequencer tests need no model file. Frames it has no answer for get every keypoint at
score 0 (the tool is not seen).
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping

from stationcheck.core.records import Frame, Keypoint, Keypoints

PointTable = Mapping[int, Mapping[str, tuple[float, float, float]]]


class ReplayKeypointDetector:
    """Answers ``detect`` from a table ``{frame_index: {name: (x_px, y_px, score)}}``."""

    def __init__(self, table: PointTable, keypoint_names: Iterable[str] = ("tip", "rear")) -> None:
        self.keypoint_names = tuple(keypoint_names)
        self._table = table
        self.hints: list[tuple[float, float] | None] = []

    def detect(self, frame: Frame, tip_hint_px: tuple[float, float] | None = None) -> Keypoints:
        self.hints.append(tip_hint_px)
        row = self._table.get(frame.index, {})
        points = []
        for name in self.keypoint_names:
            x_px, y_px, score = row.get(name, (0.0, 0.0, 0.0))
            points.append(Keypoint(name, x_px, y_px, score))
        return Keypoints(frame.index, frame.t_s, tuple(points))
