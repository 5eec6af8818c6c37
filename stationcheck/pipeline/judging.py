"""Image judgements as the frame path sees them: each judge looks at a frame (and the tool pose
and the latest outputs) and says what changed, as observations for the sequencer.

The real judges (bin activity, presence check, camera moved) live in
:mod:`stationcheck.judgements`; :mod:`stationcheck.pipeline.truth_sidecar` has stand-ins that
read the sample video's ground truth.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import TYPE_CHECKING, Protocol, runtime_checkable

from stationcheck.core.observations import Observation
from stationcheck.core.outputs import Output
from stationcheck.core.records import Frame, ToolPose

if TYPE_CHECKING:
    from stationcheck.judgements.station import StationJudgements


@runtime_checkable
class ImageJudge(Protocol):
    """Called once per frame before the frame's zone observation is stepped; returns the
    observations to step (usually only changes; a check verdict while a check step is due).
    ``output`` is the latest station output (None before the first step)."""

    def judge(
        self, frame: Frame, pose: ToolPose, output: Output | None
    ) -> Sequence[Observation]: ...


KEEP_OUT_RADIUS_PX = 40.0  # around tip and rear: the camera check takes no features there


class StationImageJudge:
    """The station's image judgements (bins, check zones, camera shift) as one judge."""

    def __init__(self, judgements: StationJudgements) -> None:
        self.judgements = judgements

    def judge(self, frame: Frame, pose: ToolPose, output: Output | None) -> list[Observation]:
        circles = [
            (point[0], point[1], KEEP_OUT_RADIUS_PX)
            for point in (pose.tip_px, pose.rear_px)
            if point is not None
        ]
        tip = pose.tip_px if pose.seen else None
        return self.judgements.observe(frame, circles, tip)
