"""The sequencer with its state held for the caller, plus everyone who must see each step.

Every observation (a frame's zone observation, an image judgement, a station input) goes
through :meth:`DecisionCore.apply`: a rework pass gets its positions from the step log, the
sequencer steps, and each sink sees the step before the next observation is taken, so a step
log sink has committed a result before the next step is allowed.
"""

from __future__ import annotations

import logging
from collections.abc import Callable, Iterable, Sequence
from dataclasses import dataclass, replace
from typing import Protocol

from stationcheck.core.events import Event
from stationcheck.core.observations import Observation, PositionRef, UnitStarted
from stationcheck.core.outputs import Output
from stationcheck.core.plan import StationPlan
from stationcheck.core.sequencer import Sequencer
from stationcheck.core.state import SequencerState
from stationcheck.errors import StationcheckError

logger = logging.getLogger(__name__)

ReworkLookup = Callable[[str], tuple[PositionRef, ...]]


@dataclass(frozen=True)
class DecisionStep:
    """One sequencer step: what it was told, what it answered, what it recorded."""

    observation: Observation
    output: Output
    events: tuple[Event, ...]


class StepSink(Protocol):
    """Sees every sequencer step, in order, before the next observation is taken."""

    def on_step(self, step: DecisionStep) -> None: ...

    def on_stop(self, error: BaseException | None) -> None:
        """The run ended (``error`` None) or failed; the sink makes its output safe."""


class Stoppable(Protocol):
    def on_stop(self, error: BaseException | None) -> None: ...


class DecisionCore:
    """Holds the sequencer state; :meth:`apply` is the only way observations reach it."""

    def __init__(
        self,
        plan: StationPlan,
        *,
        rework_lookup: ReworkLookup | None = None,
        sinks: Sequence[StepSink] = (),
        resume_from: Iterable[Event] = (),
    ) -> None:
        self.plan = plan
        self.sequencer = Sequencer(plan)
        resume = tuple(resume_from)
        self.resumed_from = resume  # the open unit's events from the log, for late viewers
        self.state: SequencerState = (
            self.sequencer.rebuild(resume) if resume else self.sequencer.initial_state()
        )
        self.rework_lookup = rework_lookup
        self.sinks: list[StepSink] = list(sinks)
        self.last_output: Output | None = None
        self.steps = 0

    def add_sink(self, sink: StepSink) -> None:
        self.sinks.append(sink)

    def prepare(self, observation: Observation) -> Observation:
        """A rework pass without positions gets the failed and unfinished positions of the
        unit's last pass from the step log."""
        if (
            isinstance(observation, UnitStarted)
            and observation.rework
            and not observation.rework_positions
            and self.rework_lookup is not None
        ):
            positions = self.rework_lookup(observation.serial)
            logger.info("rework of %s: positions %s", observation.serial, positions)
            return replace(observation, rework_positions=positions)
        return observation

    def apply(self, observation: Observation) -> DecisionStep:
        observation = self.prepare(observation)
        state, output, events = self.sequencer.step(self.state, observation)
        step = DecisionStep(observation, output, events)
        for sink in self.sinks:
            sink.on_step(step)
        self.state = state
        self.last_output = output
        self.steps += 1
        return step

    def flush(self) -> None:
        """Let sinks that hold a cycle's records (a deferred step log) commit them now."""
        for sink in self.sinks:
            flush = getattr(sink, "flush", None)
            if flush is not None:
                flush()

    def stop(self, error: BaseException | None, also: Sequence[Stoppable] = ()) -> None:
        """Tell every sink, then each of ``also`` (e.g. the loop's frame sinks), that the run
        ended, each object once however many roles it has; a sink that fails here does not
        stop the others."""
        stopped: list[Stoppable] = []
        for sink in (*self.sinks, *also):
            if not any(sink is done for done in stopped):
                stopped.append(sink)
                stop_safely(sink, error)


def stop_safely(sink: Stoppable, error: BaseException | None) -> None:
    """``sink.on_stop(error)``; a failure is logged, so the next sink still gets its turn."""
    try:
        sink.on_stop(error)
    except StationcheckError as exc:
        logger.error("an output could not stop cleanly: %s", exc)
    except Exception:
        logger.exception("an output failed while stopping")
