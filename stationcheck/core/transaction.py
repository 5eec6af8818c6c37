"""The working area of one sequencer step: the plan, the state so far and the events emitted.

A transaction lives only inside one call of ``Sequencer.step``; it is the one place where state
is replaced, and every change to a unit goes through :meth:`Transaction.emit`.
"""

from __future__ import annotations

from dataclasses import replace
from typing import Any, TypeVar

from stationcheck.core.alarms import ALARMS
from stationcheck.core.events import Event
from stationcheck.core.plan import FastenStep, StationPlan, Step
from stationcheck.core.progress import PositionProgress, UnitProgress, apply_event
from stationcheck.core.state import Health, Phase, SequencerState, ToolControl, ToolView

_Record = TypeVar("_Record", SequencerState, ToolControl, ToolView, Health)


class PlanIndex:
    """Look-ups over a :class:`StationPlan` that every step needs."""

    def __init__(self, plan: StationPlan) -> None:
        self.plan = plan
        self.steps: dict[str, Step] = {step.id: step for step in plan.steps}
        self.zone_kinds = {zone.id: zone.kind for zone in plan.zones}
        self._labels = {zone.id: zone.label for zone in plan.zones}
        self.stale_frame_ms = plan.thresholds.stale_frame_ms
        self.dwell_ms = plan.thresholds.dwell_ms
        self.max_run_ms = plan.thresholds.max_run_ms

    def label(self, zone_id: str) -> str:
        return self._labels.get(zone_id) or zone_id

    def is_kind(self, zone_id: str | None, kind: str) -> bool:
        return zone_id is not None and self.zone_kinds.get(zone_id) == kind


class Transaction:
    def __init__(self, index: PlanIndex, state: SequencerState, now_t_s: float) -> None:
        self.index = index
        self.state = replace(state, now_t_s=now_t_s)
        self.now_t_s = now_t_s
        self.events: list[Event] = []

    @property
    def phase(self) -> Phase:
        return self.state.phase

    @property
    def unit(self) -> UnitProgress | None:
        return self.state.open_unit

    def plan_step(self) -> Step | None:
        unit = self.unit
        step = unit.current_step if unit is not None else None
        return self.index.steps.get(step.id) if step is not None else None

    def fasten_step(self) -> FastenStep | None:
        step = self.plan_step()
        return step if isinstance(step, FastenStep) else None

    def target(self) -> PositionProgress | None:
        unit = self.unit
        return unit.current_position if unit is not None else None

    def emit(self, kind: str, /, **data: Any) -> None:
        """Record an event (on the open unit, if any) and fold it into the unit; ``data`` are
        the fields of the kind's class in :mod:`stationcheck.core.event_kinds`, checked there."""
        unit = self.unit
        serial = unit.serial if unit is not None else None
        if kind == "unit_started":
            serial = str(data.pop("serial"))
        event = Event.from_data(self.now_t_s, kind, serial, data)
        self.events.append(event)
        self.state = replace(self.state, unit=apply_event(self.state.unit, event))

    def alarm(self, code: str, subject: str = "", message: str = "", **details: Any) -> None:
        """Raise an alarm of the catalogue in :mod:`alarms` (its number and severity go along)."""
        info = ALARMS[code]
        if not info.condition:
            self.state = replace(
                self.state, last_event=code, event_count=self.state.event_count + 1
            )
        self.emit(
            "alarm_raised",
            code=code,
            number=info.number,
            severity=info.severity,
            subject=subject,
            message=message or info.meaning,
            **details,
        )

    def set(self, **changes: Any) -> None:
        self.state = _changed(self.state, changes)

    def set_control(self, **changes: Any) -> None:
        self.set(control=_changed(self.state.control, changes))

    def set_tool(self, **changes: Any) -> None:
        self.set(tool=_changed(self.state.tool, changes))

    def set_health(self, **changes: Any) -> None:
        self.set(health=_changed(self.state.health, changes))


def _changed(record: _Record, changes: dict[str, Any]) -> _Record:
    """``dataclasses.replace`` that skips the copy when nothing changes (most frames)."""
    if all(getattr(record, name) == value for name, value in changes.items()):
        return record
    return replace(record, **changes)
