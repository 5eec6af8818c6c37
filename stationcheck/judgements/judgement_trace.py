"""Running the judgements over a recorded video and keeping their state on every frame.

Used by the benchmark (cost per frame) and by the comparison with a ground-truth sidecar.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.core.observations import Observation, Verdict
from stationcheck.core.records import Frame
from stationcheck.errors import InputFileError
from stationcheck.judgements.station import COST_NAMES, StationJudgements


@dataclass
class JudgementTrace:
    """States after each frame: bins active, check verdicts, camera moved; costs in ms."""

    frames: int = 0
    bins: dict[str, list[bool]] = field(default_factory=dict)
    verdicts: dict[str, list[Verdict]] = field(default_factory=dict)
    moved: list[bool] = field(default_factory=list)
    camera_checked: list[bool] = field(default_factory=list)
    costs_ms: dict[str, list[float]] = field(default_factory=lambda: {n: [] for n in COST_NAMES})
    observations: list[Observation] = field(default_factory=list)

    def bin_array(self, zone: str) -> npt.NDArray[np.bool_]:
        return np.asarray(self.bins[zone], bool)

    def total_costs_ms(self) -> npt.NDArray[np.float64]:
        columns = [np.asarray(v, np.float64) for v in self.costs_ms.values()]
        return np.asarray(np.sum(columns, axis=0), np.float64)


def video_frames(path: Path, fps: float | None = None, limit: int | None = None) -> Iterator[Frame]:
    """Frames of a video file, ``t_s = index / fps`` (the file's rate unless given).

    Raises:
        InputFileError: the video cannot be opened or has no frame rate.
    """
    capture = cv2.VideoCapture(str(path))
    if not capture.isOpened():
        raise InputFileError(f"{path}: cannot open the video")
    try:
        rate = fps or capture.get(cv2.CAP_PROP_FPS)
        if not rate or rate <= 0:
            raise InputFileError(f"{path}: the video does not state its frame rate")
        index = 0
        while limit is None or index < limit:
            ok, image = capture.read()
            if not ok:
                break
            yield Frame(index, index / rate, np.asarray(image, np.uint8))
            index += 1
    finally:
        capture.release()


def run_judgements(
    judgements: StationJudgements,
    frames: Iterator[Frame],
    progress: Callable[[int], None] | None = None,
) -> JudgementTrace:
    trace = JudgementTrace()
    trace.bins = {judge.zone_id: [] for judge in judgements.bins}
    trace.verdicts = {zone: [] for zone in judgements.checks}
    for frame in frames:
        trace.observations += judgements.observe(frame)
        for judge in judgements.bins:
            trace.bins[judge.zone_id].append(judge.active)
        for zone, check in judgements.checks.items():
            trace.verdicts[zone].append(check.verdict if check is not None else "undecided")
        trace.moved.append(judgements.camera.moved)
        trace.camera_checked.append(judgements.camera.checked_at(frame.t_s))
        for name, cost in judgements.last_costs_ms.items():
            trace.costs_ms[name].append(cost)
        trace.frames += 1
        if progress is not None and trace.frames % 500 == 0:
            progress(trace.frames)
    return trace
