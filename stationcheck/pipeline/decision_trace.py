"""What a run decided, kept for the summary and the comparison with expected decisions.

Steps are placed on frames the way inputs are merged: a step belongs to the frame of the next
zone observation in the stream (inputs stamped for frame ``f`` and the image judgements of
``f`` come just before ``f``'s zone observation); steps after the last frame belong to the frame
after it. The state "at frame f" is the output after frame ``f``'s zone observation.
"""

from __future__ import annotations

from dataclasses import dataclass

from stationcheck.core.events import Event
from stationcheck.core.observations import ToolRunning, ZoneObservation
from stationcheck.pipeline.decision_core import DecisionStep


@dataclass(frozen=True)
class FrameState:
    frame_index: int
    t_s: float
    enabled: bool
    target_zone: str | None
    serial: str | None
    running: bool  # the tool reported running (station input) during this frame


@dataclass(frozen=True)
class FramedEvent:
    frame_index: int
    event: Event


class RunTrace:
    """A step sink that keeps every step of the run in memory."""

    def __init__(self) -> None:
        self.steps: list[DecisionStep] = []

    def on_step(self, step: DecisionStep) -> None:
        self.steps.append(step)

    def on_stop(self, error: BaseException | None) -> None:
        """Nothing to make safe."""

    @property
    def events(self) -> list[Event]:
        return [event for step in self.steps for event in step.events]

    def frames(self) -> list[FrameState]:
        states: list[FrameState] = []
        running = False
        for step in self.steps:
            observation = step.observation
            if isinstance(observation, ToolRunning):
                running = observation.on
            elif isinstance(observation, ZoneObservation):
                output = step.output
                states.append(
                    FrameState(
                        frame_index=observation.frame_index,
                        t_s=observation.t_s,
                        enabled=output.tool_enabled,
                        target_zone=output.target.zone if output.target is not None else None,
                        serial=output.serial,
                        running=running,
                    )
                )
        return states

    def framed_events(self) -> list[FramedEvent]:
        framed: list[FramedEvent] = []
        pending: list[Event] = []
        last_frame = -1
        for step in self.steps:
            pending.extend(step.events)
            if isinstance(step.observation, ZoneObservation):
                last_frame = step.observation.frame_index
                framed.extend(FramedEvent(last_frame, event) for event in pending)
                pending = []
        framed.extend(FramedEvent(last_frame + 1, event) for event in pending)
        return framed

    @property
    def last_frame_index(self) -> int:
        for step in reversed(self.steps):
            if isinstance(step.observation, ZoneObservation):
                return step.observation.frame_index
        return -1
