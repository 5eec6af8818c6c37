"""The one frame loop with a station side of the test's own: the order of its calls per cycle
(with and without a frame), that a failure reaches the side's stop with its error, the records
a frame leaves, and the bounded timing series."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path

import numpy as np
import pytest

from stationcheck.core.observations import Observation, UnitStarted
from stationcheck.core.outputs import Output
from stationcheck.core.records import Frame
from stationcheck.errors import ModelError
from stationcheck.pipeline.decision_core import DecisionCore
from stationcheck.pipeline.frame_loop import SAMPLES_KEPT, FrameLoop, GrabbedFrame, LoopStats
from stationcheck.pipeline.frame_path import FramePath, FrameResult, Sighting, model_file_of
from tests.pipeline.test_frame_loop import AT_A, PLAN, Collect, tip_track


class ListFeed:
    """Frames by index; None in the list is a cycle in which no frame came."""

    def __init__(self, indices: Sequence[int | None]) -> None:
        self._left = list(indices)
        self.stopped = False

    def take(self) -> GrabbedFrame | None:
        if not self._left:
            return None
        index = self._left.pop(0)
        if index is None:
            return None
        return GrabbedFrame(Frame(index, index / 30, np.zeros((8, 8, 3), np.uint8)), 0.0)

    @property
    def ended(self) -> bool:
        return not self._left

    def stop(self) -> None:
        self.stopped = True


class RecordingSide:
    """A station side that writes down every call; a unit starts before the first frame."""

    def __init__(self) -> None:
        self.calls: list[str] = []
        self.stopped_with: list[BaseException | None] = []

    def start(self, started_at_s: float) -> Sequence[Observation]:
        self.calls.append("start")
        return [UnitStarted(t_s=0.0, serial="PC-000001")]

    def cycle_started(self, now_s: float) -> None:
        self.calls.append("cycle")

    def frame_in(self, frame: Frame) -> Frame:
        self.calls.append(f"frame {frame.index}")
        return frame

    def inputs(self, sighting: Sighting | None) -> Sequence[Observation]:
        self.calls.append("inputs")
        return ()

    def no_frame(self, now_s: float) -> Sequence[Observation]:
        self.calls.append("no frame")
        return ()

    def deciding(self, sighting: Sighting, grabbed_at_s: float) -> None:
        self.calls.append("deciding")

    def on_decided(self, output: Output) -> None:
        self.calls.append("enable" if output.tool_enabled else "inhibit")

    def decided(self, sighting: Sighting, grabbed_at_s: float) -> None:
        self.calls.append("decided")

    def cycle_done(self, grabbed_at_s: float | None) -> None:
        self.calls.append("done" if grabbed_at_s is not None else "done without frame")

    def after_last(self) -> Sequence[Observation]:
        self.calls.append("after last")
        return ()

    def finish(self, stats: LoopStats) -> None:
        self.calls.append("finish")

    def stop(self, error: BaseException | None) -> None:
        self.calls.append("stop")
        self.stopped_with.append(error)


def test_each_cycle_calls_the_station_side_in_the_loop_order() -> None:
    side, feed, collect = RecordingSide(), ListFeed([0, None, 1]), Collect()
    loop = FrameLoop(FramePath(PLAN, tip_track([(0, AT_A)], 3), DecisionCore(PLAN)), feed, side,
                     frame_sinks=[collect])
    stats = loop.run()
    assert side.calls == [
        "start",
        "cycle", "frame 0", "inputs", "deciding", "inhibit", "decided", "done",
        "cycle", "inputs", "no frame", "done without frame",
        "cycle", "frame 1", "inputs", "deciding", "inhibit", "decided", "done",
        "after last", "finish", "stop",
    ]
    assert side.stopped_with == [None] and feed.stopped and collect.stopped == [None]
    assert (stats.frames, stats.cycles, len(stats.process_ms)) == (2, 3, 2)
    assert [r.sighting.frame.index for r in collect.frames] == [0, 1]
    assert all(r.output is r.steps[-1].output for r in collect.frames)
    with pytest.raises(ValueError, match="at least the zone observation's step"):
        FrameResult(collect.frames[0].sighting, ())


class BrokenDetector:
    keypoint_names = ("tip",)

    def detect(self, frame: Frame, tip_hint_px: tuple[float, float] | None = None) -> object:
        raise ModelError("model file vanished")


def test_a_failure_reaches_the_station_side_and_every_sink_with_its_error() -> None:
    side, feed, collect = RecordingSide(), ListFeed([0, 1]), Collect()
    path = FramePath(PLAN, BrokenDetector(), DecisionCore(PLAN))  # type: ignore[arg-type]
    with pytest.raises(ModelError, match="vanished"):
        FrameLoop(path, feed, side, frame_sinks=[collect]).run()
    assert side.calls[-1] == "stop" and "finish" not in side.calls
    assert isinstance(side.stopped_with[0], ModelError)
    assert feed.stopped and isinstance(collect.stopped[0], ModelError)


def test_timing_series_keep_only_their_newest_samples() -> None:
    stats = LoopStats()
    for ms in range(SAMPLES_KEPT + 10):
        stats.add("detect", float(ms))
        stats.busy_ms.append(float(ms))
    assert len(stats.stage_ms["detect"]) == len(stats.busy_ms) == SAMPLES_KEPT
    assert stats.stage_ms["detect"][0] == 10.0


def test_the_model_behind_a_detector_is_named_for_the_run(tmp_path: Path) -> None:
    class Coarse:
        path = tmp_path / "station.coarse.onnx"

    class OnnxLike:
        coarse = Coarse()

    assert model_file_of(OnnxLike()) == tmp_path / "station.coarse.onnx"
    assert model_file_of(tip_track([(0, AT_A)], 1)) is None
