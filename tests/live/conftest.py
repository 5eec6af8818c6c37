"""Factories for the live loop: a two-position plan, frames in memory that can stall, a tip
table detector, and the loop wired to an in-memory signal link."""

from __future__ import annotations

import threading
from collections.abc import Iterator, Sequence

import numpy as np

from stationcheck.core.plan import FastenStep, StationPlan, Thresholds, ZoneSpec
from stationcheck.core.records import Frame
from stationcheck.live.grabber import FrameGrabber
from stationcheck.live.linked_station import LiveLoop
from stationcheck.live.watchdog import WatchdogLimits
from stationcheck.pipeline.decision_core import DecisionCore
from stationcheck.pipeline.frame_path import FramePath
from stationcheck.pipeline.judging import ImageJudge
from stationcheck.plc.link import MemoryLink
from stationcheck.plc.signals import InputSignals
from stationcheck.plc.worker import LinkWorker, WorkerSettings
from stationcheck.vision.table_detector import TableKeypointDetector

AT_A = (115.0, 115.0)


def square(zone_id: str, x0: float) -> ZoneSpec:
    return ZoneSpec(zone_id, "fastener", ((x0, 100), (x0 + 30, 100), (x0 + 30, 130), (x0, 130)))


PLAN = StationPlan(
    zones=(square("A", 100), square("B", 200)),
    steps=(FastenStep("f", ("A", "B"), max_attempts=2),),
    thresholds=Thresholds(dwell_ms=100, lost_track_grace_ms=300, hysteresis_px=4),
)


class StallingSource:
    """``frames`` frames at ``fps`` (tip table decides where the tool is), then nothing; it
    ends as soon as ``release`` is set."""

    def __init__(self, frames: int, fps: float = 100.0) -> None:
        self.name, self.fps, self.frame_count = "stalling frames", fps, None
        self.frames = frames
        self.release = threading.Event()

    def __iter__(self) -> Iterator[Frame]:
        image = np.zeros((240, 320, 3), np.uint8)
        for index in range(self.frames):
            if self.release.is_set():
                return
            yield Frame(index=index, t_s=index / self.fps, image=image)
        self.release.wait(30.0)

    def close(self) -> None:
        self.release.set()


def detector_at(where: tuple[float, float], frames: int) -> TableKeypointDetector:
    return TableKeypointDetector({i: {"tip": (*where, 0.99)} for i in range(frames + 1)},
                                  ("tip",))


def live_loop(source: StallingSource, link: MemoryLink, *,
              detector: object | None = None, judges: Sequence[ImageJudge] = ()) -> LiveLoop:
    decisions = DecisionCore(PLAN)
    path = FramePath(PLAN, detector or detector_at(AT_A, source.frames), decisions,  # type: ignore[arg-type]
                     judges)
    grabber = FrameGrabber(lambda: source, pace=True, retry=False).start()
    worker = LinkWorker(link, settings=WorkerSettings(cycle_s=0.002)).start()
    return LiveLoop(path, grabber, worker, limits=WatchdogLimits())


def memory_link_with_unit(serial: str = "PC-000001") -> MemoryLink:
    link = MemoryLink()
    link.present(InputSignals(unit_sequence=1, serial=serial))
    return link
