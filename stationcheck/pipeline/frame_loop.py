"""The frame loop: the one loop that replay, the demo and the live run all drive.

Per cycle: take a frame (a source read in order for replay, the newest grabbed frame for a live
run, or none when the cycle's wait ran out); sight it (detector, tracker, zones) while the
previous frame's image judgements finish on the judging thread; settle the previous frame
(decide its judgements' findings); apply the station's inputs; decide the new frame's tool
position (or, without a frame, let the station side check its watchdogs); let the station
side publish and commit the cycle; hand the previous frame's result to the frame sinks.

What differs between replay and live is passed in, never copied:

- a :class:`FrameFeed` (where frames come from: :class:`SourceFeed` reads a
  :class:`~stationcheck.sources.frame_source.FrameSource` in order; the live run's grabber
  feed gives the newest frame or none within one watchdog cycle),
- a :class:`StationSide` (the station around the loop: :class:`RecordedStation` hands out
  recorded station inputs by frame time; the live run's linked station holds the clock, the
  PLC link, the stale-frame and link watchdogs, the heartbeat and the enable publishing).

Fail towards inhibit: whatever ends the loop, the ``finally`` block stops the judging thread,
tells the station side (a live run writes the enable off there), stops the feed and tells
every step sink and frame sink to stop with the error before the error goes on.
"""

from __future__ import annotations

import logging
import statistics
import time
from collections import deque
from collections.abc import Callable, Iterator, Sequence
from dataclasses import dataclass, field
from typing import Protocol

from stationcheck.core.observations import Observation
from stationcheck.core.outputs import Output
from stationcheck.core.records import Frame
from stationcheck.pipeline.frame_path import FramePath, FrameResult, Sighting
from stationcheck.sources.frame_source import FrameSource

logger = logging.getLogger(__name__)

Progress = Callable[[int, int | None], None]
SAMPLES_KEPT = 20_000  # per timing series: a day-long live run keeps the last ~11 min at 30 f/s


@dataclass(frozen=True)
class GrabbedFrame:
    """A frame as the loop takes it, with when it was in hand."""

    frame: Frame
    grabbed_at_s: float  # perf_counter when the reader or grabber had it in hand


class FrameFeed(Protocol):
    """Where the loop's frames come from."""

    def take(self) -> GrabbedFrame | None:
        """The next frame, or None: the feed ended, or (live) no frame came this cycle."""

    @property
    def ended(self) -> bool:
        """No frame will come any more."""

    def stop(self) -> None: ...


class StationSide(Protocol):
    """The station around the loop: its inputs, its clock and watchdogs, where outputs go.

    Each method that returns observations returns them for the loop to apply, in order."""

    def start(self, started_at_s: float) -> Sequence[Observation]:
        """Before the first cycle (``started_at_s``: perf_counter)."""

    def cycle_started(self, now_s: float) -> None: ...

    def frame_in(self, frame: Frame) -> Frame:
        """A new frame as the sequencer may see it (e.g. never earlier than the clock)."""

    def inputs(self, sighting: Sighting | None) -> Sequence[Observation]:
        """Station inputs to apply before the new frame's (or this cycle's) decision."""

    def no_frame(self, now_s: float) -> Sequence[Observation]:
        """A cycle without a new frame: what the frame watchdog says."""

    def deciding(self, sighting: Sighting, grabbed_at_s: float) -> None: ...

    def on_decided(self, output: Output) -> None:
        """The frame's tool-position decision, before its image judgements run."""

    def decided(self, sighting: Sighting, grabbed_at_s: float) -> None: ...

    def cycle_done(self, grabbed_at_s: float | None) -> None:
        """The cycle's decisions are all taken: publish and commit them."""

    def after_last(self) -> Sequence[Observation]:
        """After the last frame is settled (the feed ended)."""

    def finish(self, stats: LoopStats) -> None: ...

    def stop(self, error: BaseException | None) -> None:
        """The loop ended (``error`` None) or failed: make the station's outputs safe."""


class InputFeed(Protocol):
    """Recorded station inputs: what is due before a frame taken at a given time."""

    def due(self, frame_t_s: float) -> Sequence[Observation]:
        """Inputs to apply before the frame taken at ``frame_t_s``."""

    @property
    def pending(self) -> int:
        """Inputs known but not handed out yet."""


class FrameSink(Protocol):
    """Sees every frame's result after its decisions are taken (and logged)."""

    def on_frame(self, result: FrameResult) -> None: ...

    def on_stop(self, error: BaseException | None) -> None: ...


def _samples() -> deque[float]:
    return deque(maxlen=SAMPLES_KEPT)


@dataclass
class LoopStats:
    """Frames handled and where the time went (per-frame milliseconds, the last
    ``SAMPLES_KEPT`` of each series)."""

    frames: int = 0  # frames decided (their image judgements' findings follow a frame later)
    cycles: int = 0  # loop turns, with or without a new frame
    wall_s: float = 0.0
    stage_ms: dict[str, deque[float]] = field(default_factory=dict)
    process_ms: deque[float] = field(default_factory=_samples)  # taken -> position decided
    busy_ms: deque[float] = field(default_factory=_samples)  # taken -> cycle published
    inputs_not_applied: int = 0  # recorded inputs stamped after the last frame's period

    def add(self, stage: str, ms: float) -> None:
        samples = self.stage_ms.get(stage)
        if samples is None:
            samples = self.stage_ms[stage] = _samples()
        samples.append(ms)

    def total_ms(self, stage: str) -> float:
        return sum(self.stage_ms.get(stage, ()))

    def medians_ms(self) -> dict[str, float]:
        return {name: statistics.median(values) for name, values in self.stage_ms.items() if values}

    def pipeline_fps(self, excluded: Sequence[str] = ("outputs",)) -> float:
        """Frames per second of the decision path (reading frames to the logged decision),
        leaving out the optional outputs such as an annotated video."""
        busy_s = self.wall_s - sum(self.total_ms(stage) for stage in excluded) / 1000.0
        return self.frames / busy_s if busy_s > 0 else 0.0

    @property
    def fps(self) -> float:
        return self.frames / self.wall_s if self.wall_s > 0 else 0.0


class FrameLoop:
    """Drives a :class:`FramePath` from a :class:`FrameFeed` with a :class:`StationSide`."""

    def __init__(
        self,
        path: FramePath,
        feed: FrameFeed,
        station: StationSide,
        *,
        frame_sinks: Sequence[FrameSink] = (),
        progress: Callable[[int], None] | None = None,
        on_frame_taken: Callable[[Frame], None] | None = None,
    ) -> None:
        self.path = path
        self.decisions = path.decisions
        self.feed = feed
        self.station = station
        self.frame_sinks = tuple(frame_sinks)
        self.progress = progress
        self.on_frame_taken = on_frame_taken  # sees each frame as taken, before anything else
        self.stats = LoopStats()
        self.handed_on = 0  # frame results given to the frame sinks
        path.on_decided = station.on_decided  # the enable goes out before the judgements

    def run(self, should_stop: Callable[[], bool] = lambda: False) -> LoopStats:
        stats, path, station, apply = self.stats, self.path, self.station, self.decisions.apply
        started = time.perf_counter()
        error: BaseException | None = None
        try:
            for observation in station.start(started):
                apply(observation)
            while not should_stop():
                t0 = time.perf_counter()
                grabbed = self.feed.take()
                if grabbed is None and self.feed.ended:
                    break
                now = time.perf_counter()
                stats.cycles += 1
                station.cycle_started(now)
                sighting, in_hand_s = None, 0.0
                if grabbed is not None:
                    stats.add("read", (now - t0) * 1e3)
                    if self.on_frame_taken is not None:
                        self.on_frame_taken(grabbed.frame)
                    frame = station.frame_in(grabbed.frame)
                    taken_at, in_hand_s = time.perf_counter(), grabbed.grabbed_at_s
                    sighting = path.sight(frame)  # the previous frame's judgements run meanwhile
                previous = path.settle()
                t2 = time.perf_counter()
                for observation in station.inputs(sighting):
                    apply(observation)
                if sighting is None:
                    for observation in station.no_frame(now):
                        apply(observation)
                    station.cycle_done(None)
                else:
                    stats.add("inputs", (time.perf_counter() - t2) * 1e3)
                    station.deciding(sighting, in_hand_s)
                    path.decide(sighting)
                    stats.frames += 1
                    station.decided(sighting, in_hand_s)
                    stats.process_ms.append((time.perf_counter() - taken_at) * 1e3)
                    station.cycle_done(in_hand_s)
                    stats.busy_ms.append((time.perf_counter() - now) * 1e3)
                self._hand_on(previous)
            self._hand_on(path.settle())
            for observation in station.after_last():
                apply(observation)
            station.finish(stats)
        except BaseException as exc:
            error = exc
            raise
        finally:
            stats.wall_s = time.perf_counter() - started
            path.close()
            station.stop(error)
            self.feed.stop()
            self.decisions.stop(error, also=self.frame_sinks)
        return stats

    def _hand_on(self, result: FrameResult | None) -> None:
        """A settled frame's result to the frame sinks and the figures."""
        if result is None:
            return
        stats = self.stats
        t0 = time.perf_counter()
        for sink in self.frame_sinks:
            sink.on_frame(result)
        stats.add("outputs", (time.perf_counter() - t0) * 1e3)
        seen = result.sighting
        stats.add("detect", seen.detect_ms)
        stats.add("track_zones", seen.track_ms)
        stats.add("judge", result.judge_ms)
        stats.add("decide_and_log", result.decide_ms)
        self.handed_on += 1
        if self.progress is not None:
            self.progress(self.handed_on)


class SourceFeed:
    """Every frame of a source, in order, as fast as the loop takes them."""

    def __init__(self, source: FrameSource) -> None:
        self._frames: Iterator[Frame] | None = None
        self.source = source
        self.ended = False

    def take(self) -> GrabbedFrame | None:
        if self._frames is None:
            self._frames = iter(self.source)
        frame = next(self._frames, None)
        if frame is None:
            self.ended = True
            return None
        return GrabbedFrame(frame, time.perf_counter())

    def stop(self) -> None:
        """The source is its opener's to close."""


class RecordedStation:
    """A replay's station: recorded inputs handed out by frame time; outputs go only to the
    step sinks. Inputs stamped up to one frame period after the last frame are applied after
    it; later ones (beyond the frames given) are left out and counted."""

    def __init__(self, schedule: InputFeed, fps: float) -> None:
        self.schedule = schedule
        self.fps = fps
        self.last_t_s: float | None = None

    def start(self, started_at_s: float) -> Sequence[Observation]:
        return ()

    def cycle_started(self, now_s: float) -> None:
        pass

    def frame_in(self, frame: Frame) -> Frame:
        self.last_t_s = frame.t_s
        return frame

    def inputs(self, sighting: Sighting | None) -> Sequence[Observation]:
        return () if sighting is None else self.schedule.due(sighting.frame.t_s)

    def no_frame(self, now_s: float) -> Sequence[Observation]:
        return ()

    def deciding(self, sighting: Sighting, grabbed_at_s: float) -> None:
        pass

    def on_decided(self, output: Output) -> None:
        pass

    def decided(self, sighting: Sighting, grabbed_at_s: float) -> None:
        pass

    def cycle_done(self, grabbed_at_s: float | None) -> None:
        pass

    def after_last(self) -> Sequence[Observation]:
        if self.last_t_s is None:
            return ()
        return self.schedule.due(self.last_t_s + 1.0 / self.fps)

    def finish(self, stats: LoopStats) -> None:
        stats.inputs_not_applied = self.schedule.pending
        if stats.inputs_not_applied:
            logger.info(
                "%d station inputs after the last frame were not applied", stats.inputs_not_applied
            )

    def stop(self, error: BaseException | None) -> None:
        if error is not None:
            logger.info("frame loop stopped: %s", error)


def run_loop(
    source: FrameSource,
    path: FramePath,
    schedule: InputFeed,
    frame_sinks: Sequence[FrameSink] = (),
    progress: Progress | None = None,
    on_read: Callable[[Frame], None] | None = None,
) -> LoopStats:
    """A replay: every frame of ``source`` with the recorded ``schedule`` of station inputs,
    until the source ends. ``on_read`` sees each frame as soon as it is read."""
    count = source.frame_count
    loop = FrameLoop(
        path,
        SourceFeed(source),
        RecordedStation(schedule, source.fps),
        frame_sinks=frame_sinks,
        on_frame_taken=on_read,
        progress=None if progress is None else (lambda n: progress(n, count)),
    )
    return loop.run()
