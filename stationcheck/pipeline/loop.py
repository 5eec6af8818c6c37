"""The frame loop: frames from any source, station inputs merged by time, every frame through
the frame path, results to the frame sinks (annotated video, operator screen).

Fail towards inhibit: whatever goes wrong inside the loop, every sink is told to stop with the
error (the step log records the inhibit, a signal link drops enable) before the error goes on.
"""

from __future__ import annotations

import logging
import statistics
import time
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Protocol

from stationcheck.core.observations import Observation
from stationcheck.core.records import Frame
from stationcheck.pipeline.frame_path import FramePath, FrameResult
from stationcheck.sources.frame_source import FrameSource

logger = logging.getLogger(__name__)

Progress = Callable[[int, int | None], None]


class InputFeed(Protocol):
    """Station inputs for the loop: a recorded schedule (replay) or a PLC link (live)."""

    def due(self, frame_t_s: float) -> Sequence[Observation]:
        """Inputs to apply before the frame taken at ``frame_t_s``."""

    @property
    def pending(self) -> int:
        """Inputs known but not handed out yet."""


class FrameSink(Protocol):
    """Sees every frame's result after its decisions are taken (and logged)."""

    def on_frame(self, result: FrameResult) -> None: ...

    def on_stop(self, error: BaseException | None) -> None: ...


@dataclass
class LoopStats:
    """Frames handled and where the time went (per-frame milliseconds, medians and totals)."""

    frames: int = 0
    wall_s: float = 0.0
    stage_ms: dict[str, list[float]] = field(default_factory=dict)
    inputs_not_applied: int = 0  # stamped later than a frame after the last frame

    def add(self, stage: str, ms: float) -> None:
        self.stage_ms.setdefault(stage, []).append(ms)

    def total_ms(self, stage: str) -> float:
        return sum(self.stage_ms.get(stage, []))

    def medians_ms(self) -> dict[str, float]:
        return {name: statistics.median(values) for name, values in self.stage_ms.items() if values}

    def pipeline_fps(self, excluded: Sequence[str] = ("outputs",)) -> float:
        """Frames per second of the decision path (reading frames to the logged decision),
        leaving out the optional outputs such as an annotated video."""
        busy_s = self.wall_s - sum(self.total_ms(stage) for stage in excluded) / 1000.0
        return self.frames / busy_s if busy_s > 0 else 0.0

    @property
    def wall_fps(self) -> float:
        return self.frames / self.wall_s if self.wall_s > 0 else 0.0


def run_loop(
    source: FrameSource,
    path: FramePath,
    schedule: InputFeed,
    frame_sinks: Sequence[FrameSink] = (),
    progress: Progress | None = None,
    on_read: Callable[[Frame], None] | None = None,
) -> LoopStats:
    """Runs until the source ends; inputs stamped up to one frame period after the last frame
    are applied after it, later ones (beyond the frames given) are left out and counted.
    ``on_read`` sees each frame as soon as it is read, before the inputs due at it."""
    stats = LoopStats()
    decisions = path.decisions
    started = time.perf_counter()
    error: BaseException | None = None
    last_t_s: float | None = None
    try:
        frames = iter(source)
        while True:
            t0 = time.perf_counter()
            frame = next(frames, None)
            t1 = time.perf_counter()
            if frame is None:
                break
            last_t_s = frame.t_s
            if on_read is not None:
                on_read(frame)
            sighting = path.sight(frame)  # the previous frame's judgements run meanwhile
            previous = path.settle()
            t2 = time.perf_counter()
            for observation in schedule.due(frame.t_s):
                decisions.apply(observation)
            t3 = time.perf_counter()
            path.decide(sighting)
            stats.add("read", (t1 - t0) * 1e3)
            stats.add("inputs", (t3 - t2) * 1e3)
            _hand_on(previous, stats, frame_sinks, progress, source.frame_count)
        _hand_on(path.settle(), stats, frame_sinks, progress, source.frame_count)
        if last_t_s is not None:
            for observation in schedule.due(last_t_s + 1.0 / source.fps):
                decisions.apply(observation)
        stats.inputs_not_applied = schedule.pending
        if stats.inputs_not_applied:
            logger.info(
                "%d station inputs after the last frame were not applied", stats.inputs_not_applied
            )
    except BaseException as exc:
        error = exc
        logger.info("frame loop stopped: %s", exc)
        raise
    finally:
        stats.wall_s = time.perf_counter() - started
        path.close()
        decisions.stop(error, also=frame_sinks)
    return stats


def _hand_on(
    result: FrameResult | None,
    stats: LoopStats,
    frame_sinks: Sequence[FrameSink],
    progress: Progress | None,
    frame_count: int | None,
) -> None:
    """A settled frame's result to the sinks and the figures."""
    if result is None:
        return
    t0 = time.perf_counter()
    for sink in frame_sinks:
        sink.on_frame(result)
    stats.add("outputs", (time.perf_counter() - t0) * 1e3)
    stats.frames += 1
    times = result.times
    stats.add("detect", times.detect_ms)
    stats.add("track_zones", times.track_ms)
    stats.add("judge", times.judge_ms)
    stats.add("decide_and_log", times.decide_ms)
    if progress is not None:
        progress(stats.frames, frame_count)
