"""The frame loop and the per-frame path: inputs merged by time, rework positions from the log,
detector failures and any error in the loop ending with the tool inhibited and logged."""

from __future__ import annotations

import threading
from collections.abc import Sequence
from pathlib import Path

import numpy as np
import pytest

from stationcheck.core import event_kinds as ev
from stationcheck.core.observations import (
    CameraMoved,
    Observation,
    TighteningResult,
    ToolRunning,
    UnitStarted,
)
from stationcheck.core.plan import FastenStep, StationPlan, Thresholds, ZoneSpec
from stationcheck.core.records import Frame, Keypoints
from stationcheck.errors import InputFileError, ModelError
from stationcheck.pipeline.decision_core import DecisionCore, DecisionStep
from stationcheck.pipeline.decision_trace import RunTrace
from stationcheck.pipeline.frame_loop import run_loop
from stationcheck.pipeline.frame_path import FramePath, FrameResult
from stationcheck.pipeline.log_sink import (
    STOPPED_ON_ERROR,
    STOPPED_ON_REQUEST,
    StepLogSink,
    rework_positions_from_log,
)
from stationcheck.pipeline.station_inputs import InputSchedule
from stationcheck.sources.memory_source import MemoryFrameSource
from stationcheck.store import MemoryStepLog, SqliteStepLog
from stationcheck.vision.table_detector import TableKeypointDetector

FPS = 30.0
AT_A = (115.0, 115.0)
AT_B = (215.0, 115.0)
AWAY = (250.0, 200.0)  # inside the 320 x 240 picture, in no zone


def square(zone_id: str, x0: float) -> ZoneSpec:
    return ZoneSpec(zone_id, "fastener", ((x0, 100), (x0 + 30, 100), (x0 + 30, 130), (x0, 130)))


PLAN = StationPlan(
    zones=(square("A", 100), square("B", 200)),
    steps=(FastenStep("f", ("A", "B"), max_attempts=2),),
    thresholds=Thresholds(dwell_ms=200, lost_track_grace_ms=300, hysteresis_px=4),
)


def tip_track(spans: Sequence[tuple[int, tuple[float, float] | None]], count: int
              ) -> TableKeypointDetector:
    """Tip positions from frame spans ``(first frame, position or None = unseen)``."""
    table: dict[int, dict[str, tuple[float, float, float]]] = {}
    for frame in range(count):
        where = [pos for first, pos in spans if first <= frame][-1]
        table[frame] = {"tip": (*where, 0.99)} if where is not None else {}
    return TableKeypointDetector(table, ("tip",))


def images(count: int) -> list[np.ndarray]:
    return [np.zeros((240, 320, 3), np.uint8) for _ in range(count)]


def t(frame: int) -> float:
    return round(frame / FPS, 6)


class Collect:
    """A frame sink and step sink that remembers what it saw and how it was stopped."""

    def __init__(self) -> None:
        self.frames: list[FrameResult] = []
        self.steps: list[DecisionStep] = []
        self.stopped: list[BaseException | None] = []

    def on_step(self, step: DecisionStep) -> None:
        self.steps.append(step)

    def on_frame(self, result: FrameResult) -> None:
        self.frames.append(result)

    def on_stop(self, error: BaseException | None) -> None:
        self.stopped.append(error)


def run(inputs: Sequence[Observation], detector: TableKeypointDetector, count: int,
        log: MemoryStepLog | SqliteStepLog | None = None,
        source: MemoryFrameSource | None = None) -> tuple[RunTrace, Collect]:
    log = log if log is not None else MemoryStepLog()
    trace, collect = RunTrace(), Collect()
    decisions = DecisionCore(PLAN, sinks=[StepLogSink(log, clock=lambda: 0.0), trace, collect],
                             rework_lookup=lambda serial: rework_positions_from_log(log, serial))
    path = FramePath(PLAN, detector, decisions)
    run_loop(source or MemoryFrameSource(images(count), FPS), path, InputSchedule(inputs),
             [collect])
    return trace, collect


def entered(collect: Collect, zone: str, after: int = 0) -> int:
    """The first frame (from ``after``) whose zone observation puts the tip in ``zone``."""
    return next(f.sighting.frame.index for f in collect.frames
                if f.sighting.frame.index >= after and f.sighting.zone.zone == zone)


def edges(trace: RunTrace) -> list[tuple[int, str, str | None]]:
    return [(f.frame_index, f.event.kind, getattr(f.event, "zone", None))
            for f in trace.framed_events() if f.event.kind in ("tool_enabled", "tool_inhibited")]


def test_enable_follows_dwell_and_results_arrive_between_frames() -> None:
    detector = tip_track([(0, AWAY), (10, AT_A), (40, AT_B)], 80)
    inputs = [UnitStarted(t(2), "U-1"), ToolRunning(t(20), True), ToolRunning(t(30), False),
              TighteningResult(t(30), True, 5.0, 30.0, 1), ToolRunning(t(50), True),
              ToolRunning(t(60), False), TighteningResult(t(60), True, 5.0, 30.0, 2)]
    trace, collect = run(inputs, detector, 80)
    in_a, in_b = entered(collect, "A"), entered(collect, "B")
    # enabled once the tip has dwelled 200 ms (6 frames at 30 fps) in the target; the result
    # stamped for frame 30 is applied before frame 30 and moves the target to B
    assert edges(trace) == [
        (in_a + 6, "tool_enabled", "A"), (30, "tool_inhibited", "B"),
        (in_b + 6, "tool_enabled", "B"), (60, "tool_inhibited", None),
    ]
    assert 10 <= in_a < 20 and 40 <= in_b < 50
    assert collect.stopped == [None]  # a step sink and a frame sink, told once
    assert [f.output.unit_status for f in collect.frames][-1] == "ok"


def test_a_rework_pass_gets_its_positions_from_the_log_and_enables_only_those() -> None:
    detector = tip_track([(0, AWAY), (10, AT_A), (60, AT_B), (100, AWAY), (110, AT_B),
                          (150, AT_A)], 200)
    inputs = [UnitStarted(t(2), "U-1"),
              ToolRunning(t(20), True), ToolRunning(t(25), False),
              TighteningResult(t(25), True, 5.0, 30.0, 1),
              ToolRunning(t(70), True), ToolRunning(t(75), False),
              TighteningResult(t(75), False, 3.0, 60.0, 2),
              ToolRunning(t(88), True), ToolRunning(t(93), False),  # after the new dwell
              TighteningResult(t(93), False, 3.1, 61.0, 3),
              UnitStarted(t(105), "U-1", rework=True)]
    trace, collect = run(inputs, detector, 200)
    started = [s.observation for s in collect.steps if isinstance(s.observation, UnitStarted)]
    assert [tuple(r.zone for r in u.rework_positions) for u in started] == [(), ("B",)]
    rework_edges = [e for e in edges(trace) if e[0] >= 105]
    # back at B the tool is enabled after the dwell; at A (done in the first pass) never
    assert rework_edges[0] == (entered(collect, "B", after=105) + 6, "tool_enabled", "B")
    assert all(zone != "A" for frame, kind, zone in rework_edges if kind == "tool_enabled")
    assert not any(f.output.tool_enabled for f in collect.frames if f.sighting.frame.index >= 150)


class FlakyDetector:
    """Raises on some frames (e.g. an onnxruntime failure), else answers like ``inner``."""

    keypoint_names = ("tip",)

    def __init__(self, inner: TableKeypointDetector, failing: set[int]) -> None:
        self.inner = inner
        self.failing = failing

    def detect(self, frame: Frame, tip_hint_px: tuple[float, float] | None = None) -> Keypoints:
        if frame.index in self.failing:
            raise RuntimeError(f"inference failed on frame {frame.index}")
        return self.inner.detect(frame, tip_hint_px)


def test_a_detector_failure_inhibits_until_the_next_good_frame() -> None:
    detector = FlakyDetector(tip_track([(0, AT_A)], 40), failing={20, 21})
    trace, collect = run([UnitStarted(t(1), "U-1")], detector, 40)
    by_frame = {f.sighting.frame.index: f.output for f in collect.frames}
    assert by_frame[19].tool_enabled
    assert not by_frame[20].tool_enabled and by_frame[20].enable_reason == "detector_fault"
    assert "detector_fault" in by_frame[21].alarms
    assert any(isinstance(f.event, ev.AlarmRaised) and f.event.code == "detector_fault"
               for f in trace.framed_events())
    assert by_frame[30].tool_enabled  # the tip dwelled again after the fault cleared


def test_a_detector_that_keeps_failing_stops_the_run_inhibited() -> None:
    detector = FlakyDetector(tip_track([(0, AT_A)], 60), failing=set(range(20, 60)))
    log = MemoryStepLog()
    with pytest.raises(ModelError, match="failed on 30 frames in a row"):
        run([UnitStarted(t(1), "U-1")], detector, 60, log=log)
    last = log.events()[-1].event
    assert isinstance(last, ev.ToolInhibited) and last.reason == STOPPED_ON_ERROR


def test_a_source_that_breaks_mid_run_leaves_the_log_with_everything_before_it(
    tmp_path: Path,
) -> None:
    """SQLite file reopened after the failure: committed events survive, and the last one says
    the tool was inhibited because the run stopped."""
    detector = tip_track([(0, AT_A)], 60)
    broken = MemoryFrameSource(images(60), FPS, fail_at=40,
                               error=InputFileError("video x is damaged: decoding stopped"))
    path = tmp_path / "log.sqlite"
    with SqliteStepLog(path) as log, pytest.raises(InputFileError, match="damaged"):
        run([UnitStarted(t(1), "U-1")], detector, 60, log=log, source=broken)
    with SqliteStepLog(path, readonly=True) as log:
        kinds = [s.event.kind for s in log.events()]
        last = log.events()[-1].event
    assert kinds[:3] == ["unit_started", "step_started", "tool_enabled"]
    assert last.kind == "tool_inhibited"
    assert last.serial == "U-1"
    assert last.to_data() == {"reason": STOPPED_ON_ERROR, "was_enabled": True,
                         "error": "video x is damaged: decoding stopped"}


def test_a_run_stopped_on_request_is_logged_as_a_stop_not_an_error(tmp_path: Path) -> None:
    """Ctrl-C (or SIGTERM from a service manager) mid-run: the log says the tool went off
    because the run was stopped, with no error attached."""
    class StopAt:  # a frame sink that is the operator pressing Ctrl-C at frame 30
        def on_frame(self, result: FrameResult) -> None:
            if result.sighting.frame.index == 30:
                raise KeyboardInterrupt

        def on_stop(self, error: BaseException | None) -> None:
            pass

    log = MemoryStepLog()
    decisions = DecisionCore(PLAN, sinks=[StepLogSink(log, clock=lambda: 0.0)])
    path = FramePath(PLAN, tip_track([(0, AT_A)], 60), decisions)
    with pytest.raises(KeyboardInterrupt):
        run_loop(MemoryFrameSource(images(60), FPS), path,
                 InputSchedule([UnitStarted(t(1), "U-1")]), [StopAt()])
    last = log.events()[-1].event
    assert last.kind == "tool_inhibited"
    assert last.to_data() == {"reason": STOPPED_ON_REQUEST, "was_enabled": True}


def test_inputs_just_after_the_last_frame_count_and_later_ones_are_left_out() -> None:
    detector = tip_track([(0, AWAY)], 10)
    inputs = [UnitStarted(t(2), "U-1"), UnitStarted(t(10), "U-2"), UnitStarted(t(30), "U-3")]
    _, collect = run(inputs, detector, 10)
    started = [s.observation.serial for s in collect.steps if isinstance(s.observation, UnitStarted)]
    assert started == ["U-1", "U-2"]


class CameraBumps:
    """A judge that reports the camera moved on some frames and back in place later, and notes
    the thread it ran on."""

    def __init__(self, moved_on: Sequence[int], back_on: Sequence[int],
                 fail_on: int | None = None) -> None:
        self.moved_on, self.back_on, self.fail_on = set(moved_on), set(back_on), fail_on
        self.threads: set[str] = set()

    def judge(self, frame: Frame, pose: object, output: object) -> list[Observation]:
        self.threads.add(threading.current_thread().name)
        if frame.index == self.fail_on:
            raise RuntimeError(f"judge broke on frame {frame.index}")
        if frame.index in self.moved_on:
            return [CameraMoved(t_s=frame.t_s, moved=True, shift_px=9.0)]
        if frame.index in self.back_on:
            return [CameraMoved(t_s=frame.t_s, moved=False, shift_px=0.0)]
        return []


BUMP_INPUTS = [UnitStarted(t(2), "U-1"), ToolRunning(t(20), True), ToolRunning(t(30), False),
               TighteningResult(t(30), True, 5.0, 30.0, 1), ToolRunning(t(52), True),
               ToolRunning(t(58), False), TighteningResult(t(58), True, 5.0, 30.0, 2)]


def step_kinds(steps: Sequence[DecisionStep]) -> list[tuple[str, float, bool]]:
    return [(type(s.observation).__name__, s.observation.t_s, s.output.tool_enabled)
            for s in steps]


def test_the_loop_decides_what_the_judging_thread_found_as_one_frame_at_a_time_would() -> None:
    """Judgements on their own thread change nothing the sequencer sees: same observations, same
    order, same outputs as :meth:`FramePath.process` frame by frame with inputs between."""
    spans = [(0, AWAY), (10, AT_A), (40, AT_B)]
    bumps = {"moved_on": [19, 45], "back_on": [29, 47]}  # frames just before inputs are due

    one_by_one = Collect()
    path = FramePath(PLAN, tip_track(spans, 80), DecisionCore(PLAN, sinks=[one_by_one]),
                     [CameraBumps(**bumps)])
    schedule = InputSchedule(BUMP_INPUTS)
    for frame in MemoryFrameSource(images(80), FPS):
        for observation in schedule.due(frame.t_s):
            path.decisions.apply(observation)
        one_by_one.on_frame(path.process(frame))

    pipelined = Collect()
    judge = CameraBumps(**bumps)
    path = FramePath(PLAN, tip_track(spans, 80), DecisionCore(PLAN, sinks=[pipelined]), [judge])
    run_loop(MemoryFrameSource(images(80), FPS), path, InputSchedule(BUMP_INPUTS), [pipelined])

    assert judge.threads and all(name.startswith("judging") for name in judge.threads)
    assert step_kinds(pipelined.steps) == step_kinds(one_by_one.steps)
    kinds = [kind for kind, _, _ in step_kinds(pipelined.steps)]
    assert kinds.count("CameraMoved") == 4 and kinds.count("TighteningResult") == 2
    assert [f.sighting.frame.index for f in pipelined.frames] == list(range(80))
    assert [f.output for f in pipelined.frames] == [f.output for f in one_by_one.frames]
    assert [len(f.steps) for f in pipelined.frames] == [len(f.steps) for f in one_by_one.frames]


def test_a_judgement_that_raises_stops_the_loop_inhibited_with_its_error() -> None:
    collect = Collect()
    decisions = DecisionCore(PLAN, sinks=[collect])
    path = FramePath(PLAN, tip_track([(0, AT_A)], 40), decisions,
                     [CameraBumps([], [], fail_on=20)])
    with pytest.raises(RuntimeError, match="judge broke on frame 20"):
        run_loop(MemoryFrameSource(images(40), FPS), path, InputSchedule(BUMP_INPUTS), [collect])
    assert len(collect.stopped) == 1 and isinstance(collect.stopped[0], RuntimeError)
    assert [f.sighting.frame.index for f in collect.frames] == list(range(20))  # up to the broken one
    assert path._executor is None  # the judging thread was stopped


def test_deciding_a_frame_before_the_previous_one_is_settled_is_refused() -> None:
    path = FramePath(PLAN, tip_track([(0, AT_A)], 3), DecisionCore(PLAN), [CameraBumps([], [])])
    frames = [Frame(i, t(i), image) for i, image in enumerate(images(3))]
    path.decide(path.sight(frames[0]))
    with pytest.raises(RuntimeError, match="settle the previous frame"):
        path.decide(path.sight(frames[1]))
    first = path.settle()
    assert first is not None and first.sighting.frame.index == 0
    assert path.settle() is None
    path.close()
