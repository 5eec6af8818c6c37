"""Real-time playback of a recorded run, so a person can follow it on the operator screen.

A frame sink that holds the loop until the wall clock has caught up with the frame's own
time (scaled by ``speed``). Only for replays and demos: a live loop is paced by its camera.
"""

from __future__ import annotations

import time
from collections.abc import Callable

from stationcheck.pipeline.decision_core import DecisionStep
from stationcheck.pipeline.frame_path import FrameResult


class RealTimePacer:
    def __init__(
        self,
        speed: float = 1.0,
        *,
        clock: Callable[[], float] = time.perf_counter,
        sleep: Callable[[float], None] = time.sleep,
    ) -> None:
        if not speed > 0:
            raise ValueError(f"RealTimePacer.speed must be > 0, got {speed}")
        self.speed = speed
        self.clock = clock
        self.sleep = sleep
        self._start: tuple[float, float] | None = None  # (wall, frame t_s) of the first frame
        self.waited_s = 0.0

    def on_step(self, step: DecisionStep) -> None:
        """Nothing to do per sequencer step."""

    def on_frame(self, result: FrameResult) -> None:
        now = self.clock()
        if self._start is None:
            self._start = (now, result.sighting.frame.t_s)
            return
        wall0, t0 = self._start
        due = wall0 + (result.sighting.frame.t_s - t0) / self.speed
        if due > now:
            self.sleep(due - now)
            self.waited_s += due - now

    def on_stop(self, error: BaseException | None) -> None:
        self._start = None
