"""Factories for the operator screen tests: the demo plan, a small plan with a confirm step,
frames pushed through a real DecisionCore, a served screen, a replay held at chosen moments."""

from __future__ import annotations

import http.client
import threading
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from stationcheck.config import load_config
from stationcheck.core.observations import Observation, ZoneObservation
from stationcheck.core.outputs import Output
from stationcheck.core.plan import ConfirmStep, FastenStep, StationPlan, ZoneSpec
from stationcheck.core.records import Frame, ToolPose
from stationcheck.pipeline.decision_core import DecisionCore, DecisionStep
from stationcheck.pipeline.frame_path import FrameResult, Sighting
from stationcheck.web.access import AccessRule
from stationcheck.web.listener import WebServer
from stationcheck.web.operator.feed import OperatorFeed, ScreenFrame
from stationcheck.web.operator.operator_routes import operator_router
from tests.pipeline.conftest import CONFIG, INPUTS, TRUTH, VIDEO, needs_sample

__all__ = ["CONFIG", "INPUTS", "TRUTH", "VIDEO", "needs_sample"]

SHOTS = Path("/tmp/shots/operator")


@pytest.fixture(scope="session")
def demo_plan() -> StationPlan:
    return load_config(CONFIG).to_plan()


def square(cx: float, cy: float, half: float = 20.0) -> tuple[tuple[float, float], ...]:
    return ((cx - half, cy - half), (cx + half, cy - half), (cx + half, cy + half),
            (cx - half, cy + half))


@pytest.fixture(scope="session")
def confirm_plan() -> StationPlan:
    """Fit a label (acknowledged by the operator), then fasten two screws."""
    return StationPlan(
        zones=(ZoneSpec("s1", "fastener", square(100, 100), "screw 1"),
               ZoneSpec("s2", "fastener", square(200, 100), "screw 2")),
        steps=(ConfirmStep("fit_label", "Fit the type label."),
               FastenStep("fasten", ("s1", "s2"))),
        station="test station (test data)",
    )


def blank_image(value: int = 60) -> np.ndarray:
    return np.full((240, 320, 3), value, np.uint8)


@dataclass
class Station:
    """A DecisionCore driven by hand: station inputs and one frame result at a time."""

    plan: StationPlan
    decisions: DecisionCore = field(init=False)
    index: int = 0

    def __post_init__(self) -> None:
        self.decisions = DecisionCore(self.plan)

    @property
    def t_s(self) -> float:
        return self.index / 30.0

    def apply(self, make: Callable[[float], Observation]) -> DecisionStep:
        return self.decisions.apply(make(self.t_s))

    def frame(self, tip_px: tuple[float, float] | None = None,
              at: str | None = None) -> FrameResult:
        """One frame; ``at``: the fastener zone the tip has dwelled at for a second."""
        t_s = self.t_s
        zone = ZoneObservation(t_s=t_s, frame_index=self.index, zone=at, arrived_zone=at,
                               since_t_s=max(0.0, t_s - 1.0) if at else None,
                               dwell_ms=1000.0 if at else 0.0, visible=tip_px is not None,
                               tip_px=tip_px)
        step = self.decisions.apply(zone)
        pose = ToolPose(t_s, self.index, tip_px, None, tip_px is not None,
                        tip_px is not None, 0.9 if tip_px else 0.0)
        result = FrameResult(Sighting(Frame(self.index, t_s, blank_image()), None, None, pose,
                                      zone), (step,))
        self.index += 1
        return result

    @property
    def output(self) -> Output:
        assert self.decisions.last_output is not None
        return self.decisions.last_output


def wait_for(condition: Callable[[], Any], what: str, timeout_s: float = 10.0) -> Any:
    """Polls ``condition`` until it returns something truthy; fails after the deadline."""
    deadline = time.monotonic() + timeout_s
    while True:
        value = condition()
        if value:
            return value
        if time.monotonic() > deadline:
            raise AssertionError(f"timed out waiting for {what}")
        time.sleep(0.005)


def wait_frame(feed: OperatorFeed, pred: Callable[[ScreenFrame], bool], what: str,
               timeout_s: float = 10.0) -> ScreenFrame:
    """The first published frame (the current one included) that satisfies ``pred``."""
    deadline = time.monotonic() + timeout_s
    seq = -1
    while time.monotonic() < deadline:
        latest = feed.latest
        if latest is not None and latest.seq > seq:
            if pred(latest):
                return latest
            seq = latest.seq
        feed.wait_newer(seq, 0.2)
    raise AssertionError(f"timed out waiting for {what}")


@dataclass
class Served:
    feed: OperatorFeed
    server: WebServer

    @property
    def url(self) -> str:
        return self.server.url

    def request(self, method: str, path: str, body: bytes | None = None,
                headers: dict[str, str] | None = None) -> tuple[int, bytes]:
        host, port = self.server.server_address[:2]
        conn = http.client.HTTPConnection(str(host), int(port), timeout=5)
        try:
            conn.request(method, path, body=body, headers=headers or {})
            response = conn.getresponse()
            return response.status, response.read()
        finally:
            conn.close()

    def close(self) -> None:
        self.feed.close()
        self.server.close()


def serve(feed: OperatorFeed, port: int = 0) -> Served:
    return Served(feed, WebServer(operator_router(feed), "127.0.0.1", port, AccessRule()).start())


@pytest.fixture
def served_factory() -> Iterator[Callable[..., Served]]:
    made: list[Served] = []

    def make(plan: StationPlan, **kwargs: Any) -> Served:
        served = serve(OperatorFeed(plan, **kwargs))
        made.append(served)
        return served

    yield make
    for served in made:
        served.close()


class Holds:
    """A frame sink placed after the screen's feed: at each moment (a predicate on the frame's
    outputs) it holds the loop until the test has seen that moment on the screen and lets go,
    so a fast replay can be followed without timing luck."""

    def __init__(self, moments: list[tuple[str, Callable[[Output], bool]]]) -> None:
        self.moments = moments
        self.reached = [threading.Event() for _ in moments]
        self.released = [threading.Event() for _ in moments]
        self.frames: list[int] = [-1] * len(moments)
        self.next = 0
        self.stopped = threading.Event()

    def on_step(self, step: DecisionStep) -> None:
        """Holds look at frames only."""

    def on_frame(self, result: FrameResult) -> None:
        if self.next >= len(self.moments):
            return
        name, pred = self.moments[self.next]
        if pred(result.output):
            self.frames[self.next] = result.sighting.frame.index
            self.reached[self.next].set()
            if not self.released[self.next].wait(timeout=60):
                raise AssertionError(f"the test never let go of moment {name!r}")
            self.next += 1

    def on_stop(self, error: BaseException | None) -> None:
        self.stopped.set()
        for event in self.released:
            event.set()

    def wait(self, number: int, timeout_s: float = 30.0) -> None:
        name = self.moments[number][0]
        deadline = time.monotonic() + timeout_s
        while not self.reached[number].wait(0.05):
            if self.stopped.is_set() or time.monotonic() > deadline:
                raise AssertionError(f"the replay never reached moment {name!r}")

    def release(self, number: int) -> None:
        self.released[number].set()
