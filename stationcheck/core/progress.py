"""A unit's progress, derived from its events only.

The sequencer changes a unit solely by emitting events and folding them in with
:func:`apply_event`; :func:`rebuild_unit` runs the same fold over a stored event stream, so a
unit rebuilt after a restart is exactly the unit the sequencer had.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, replace

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import RESULT_NOK, RESULT_OK, Event
from stationcheck.core.observations import PositionRef


@dataclass(frozen=True)
class PositionProgress:
    ref: PositionRef
    number: int  # 1-based in the fasten step's tightening order (same in a rework pass)
    attempts: int = 0
    result: str | None = None  # RESULT_OK or RESULT_NOK once decided


@dataclass(frozen=True)
class StepEntry:
    """One step of this pass of the unit (a rework pass keeps only some steps)."""

    id: str
    kind: str


@dataclass(frozen=True)
class UnitProgress:
    serial: str
    rework: bool
    started_t_s: float
    steps: tuple[StepEntry, ...]
    positions: tuple[PositionProgress, ...]
    step_index: int = -1
    step_started_t_s: float | None = None
    alarms: tuple[str, ...] = ()
    result: str | None = None  # set when the unit ended
    ended_by: str | None = None
    ended_t_s: float | None = None

    @property
    def is_open(self) -> bool:
        return self.result is None

    @property
    def current_step(self) -> StepEntry | None:
        if self.is_open and 0 <= self.step_index < len(self.steps):
            return self.steps[self.step_index]
        return None

    def positions_of(self, step_id: str) -> tuple[PositionProgress, ...]:
        return tuple(p for p in self.positions if p.ref.step == step_id)

    @property
    def current_position(self) -> PositionProgress | None:
        """The next position to fasten in the current step (tightening order), if any."""
        step = self.current_step
        if step is None or step.kind != "fasten":
            return None
        for position in self.positions_of(step.id):
            if position.result is None:
                return position
        return None

    @property
    def failed_positions(self) -> tuple[PositionRef, ...]:
        return tuple(p.ref for p in self.positions if p.result == RESULT_NOK)

    @property
    def unfinished_positions(self) -> tuple[PositionRef, ...]:
        return tuple(p.ref for p in self.positions if p.result is None)


def _with_position(unit: UnitProgress, ref: PositionRef, **changes: object) -> UnitProgress:
    positions = tuple(
        replace(p, **changes) if p.ref == ref else p  # type: ignore[arg-type]
        for p in unit.positions
    )
    return replace(unit, positions=positions)


def _start(event: ev.UnitStarted) -> UnitProgress:
    assert event.serial is not None
    return UnitProgress(
        serial=event.serial,
        rework=event.rework,
        started_t_s=event.t_s,
        steps=tuple(StepEntry(id=s.id, kind=s.kind) for s in event.steps),
        positions=tuple(PositionProgress(ref=p.ref, number=p.number) for p in event.positions),
    )


def apply_event(unit: UnitProgress | None, event: Event) -> UnitProgress | None:
    """Fold one event into the unit it belongs to; events of other units change nothing."""
    if isinstance(event, ev.UnitStarted):
        return _start(event)
    if unit is None or event.serial != unit.serial or not unit.is_open:
        return unit
    match event:
        case ev.StepStarted():
            return replace(unit, step_index=event.index, step_started_t_s=event.t_s)
        case ev.TighteningResult():
            ref = PositionRef(event.step, event.zone)
            return _with_position(unit, ref, attempts=event.attempt)
        case ev.PositionCompleted():
            return _with_position(unit, PositionRef(event.step, event.zone), result=RESULT_OK)
        case ev.PositionFailed():
            return _with_position(unit, PositionRef(event.step, event.zone), result=RESULT_NOK)
        case ev.AlarmRaised():
            return replace(unit, alarms=unit.alarms + (event.code,))
        case ev.UnitEnded():
            return replace(unit, result=event.result, ended_by=event.ended_by, ended_t_s=event.t_s)
    return unit


def rebuild_unit(events: Iterable[Event]) -> UnitProgress | None:
    """The last unit in the stream, as the sequencer had it after the last event."""
    unit: UnitProgress | None = None
    for event in events:
        unit = apply_event(unit, event)
    return unit
