"""Events -> derived rows (units, steps, alarms, unit tags): the one place that decides what a
row says.

Both logs run this same fold: the SQLite log inside the transaction that inserts the events (and
again in ``rebuild``), the in-memory log over plain dicts. It reads only the typed events (and the rows
it made from earlier events), never a clock; an event whose data does not fit its kind never
gets here (it is refused when made or read, see :mod:`stationcheck.core.events`).
"""

from __future__ import annotations

import logging
from dataclasses import replace
from typing import Any, Protocol

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import RESULT_NOK, RESULT_OK, RESULT_UNDECIDED, Event
from stationcheck.core.handlers import ANGLE_UNIT, TORQUE_UNIT
from stationcheck.store.log_records import (
    RESULTS,
    UNIT_OPEN,
    AlarmRow,
    StepRow,
    StoredEvent,
    UnitRow,
)

logger = logging.getLogger(__name__)

EVIDENCE_KEY = "evidence_path"
FAILED_POSITION_TAG = "failed_position:"
ALARM_TAG = "alarm:"


class DerivedTables(Protocol):
    """Where the fold keeps its rows (SQLite tables or dicts)."""

    def get_unit(self, serial: str) -> UnitRow | None: ...

    def put_unit(self, unit: UnitRow) -> None: ...

    def add_step(self, step: StepRow) -> None: ...

    def set_position_result(
        self, serial: str, pass_no: int, step: str, position: str, result: str
    ) -> None:
        """Mark the latest attempt at this position in this pass as the deciding one."""

    def add_alarm(self, alarm: AlarmRow) -> None: ...

    def clear_alarm(self, code: str, subject: str, cleared_t_s: float) -> None:
        """Set ``cleared_t_s`` on the latest uncleared alarm with this code and subject."""

    def add_tag(self, unit: UnitRow, tag: str) -> None:
        """Mark the unit (once per tag) for quick look-ups, e.g. ``failed_position:p3``."""


def _result(value: str | None) -> str:
    return value if value in RESULTS else RESULT_UNDECIDED


def _rest(event: Event, shown: frozenset[str]) -> dict[str, Any]:
    """The event's other fields, as stored, for a row's ``detail``."""
    return {k: v for k, v in event.to_data().items() if k not in shown}


def _measured(quantity: ev.Measured, name: str, unit: str) -> tuple[float | None, ...]:
    """(value, low, high) of a measured quantity, as given when its unit is not the usual."""
    if quantity.unit != unit:
        logger.warning("%s given in %r, expected %r; stored as given", name, quantity.unit, unit)
    return quantity.value, quantity.low, quantity.high


def _unit_for(tables: DerivedTables, stored: StoredEvent) -> UnitRow:
    """The unit the event belongs to; a log that starts mid-unit gets an open row for it."""
    serial = stored.event.serial
    assert serial is not None
    unit = tables.get_unit(serial)
    if unit is None:
        logger.warning(
            "event %d (%s) for unit %s before its start", stored.seq, stored.event.kind, serial
        )
        unit = UnitRow(
            serial=serial,
            status=UNIT_OPEN,
            passes=1,
            started_t_s=stored.event.t_s,
            started_at_s=stored.recorded_at_s,
            open_seq=stored.seq,
        )
    return unit


def _unit_started(tables: DerivedTables, stored: StoredEvent, event: ev.UnitStarted) -> None:
    assert event.serial is not None
    unit = tables.get_unit(event.serial)
    if unit is None:
        unit = UnitRow(
            serial=event.serial,
            status=UNIT_OPEN,
            passes=1,
            started_t_s=event.t_s,
            started_at_s=stored.recorded_at_s,
            open_seq=stored.seq,
            reworked=event.rework,
        )
    else:
        unit = replace(
            unit,
            status=UNIT_OPEN,
            passes=unit.passes + 1,
            open_seq=stored.seq,
            reworked=True,
            first_time_through=False,
            current_step=None,
            unfinished_positions=(),
        )
    tables.put_unit(unit)


def _step_started(tables: DerivedTables, stored: StoredEvent, event: ev.StepStarted) -> None:
    unit = _unit_for(tables, stored)
    tables.put_unit(replace(unit, current_step=event.step or None))


def _tightening_result(
    tables: DerivedTables, stored: StoredEvent, event: ev.TighteningResult
) -> None:
    unit = _unit_for(tables, stored)
    result = _result(event.result)
    torque, torque_low, torque_high = _measured(event.torque, "torque", TORQUE_UNIT)
    angle, angle_low, angle_high = _measured(event.angle, "angle", ANGLE_UNIT)
    tables.add_step(
        StepRow(
            seq=stored.seq,
            serial=unit.serial,
            pass_no=unit.passes,
            step=event.step or "?",
            kind="fasten",
            result=result,
            ended_t_s=event.ended_t_s,
            recorded_at_s=stored.recorded_at_s,
            position=event.zone or None,
            position_number=event.position,
            attempt=event.attempt,
            max_attempts=event.max_attempts,
            torque_nm=torque,
            torque_low_nm=torque_low,
            torque_high_nm=torque_high,
            angle_deg=angle,
            angle_low_deg=angle_low,
            angle_high_deg=angle_high,
            within_limits=event.within_limits,
            sequence=event.sequence,
            started_t_s=event.started_t_s,
            evidence_path=event.evidence_path or None,
        )
    )
    tables.put_unit(
        replace(
            unit,
            retries=unit.retries + (event.attempt > 1),
            nok_results=unit.nok_results + (result == RESULT_NOK),
        )
    )


def _position_decided(
    tables: DerivedTables,
    stored: StoredEvent,
    event: ev.PositionCompleted | ev.PositionFailed,
    result: str,
) -> None:
    unit = _unit_for(tables, stored)
    zone, step = event.zone, event.step or "?"
    if not zone:
        return
    tables.set_position_result(unit.serial, unit.passes, step, zone, result)
    if result == RESULT_NOK and zone not in unit.failed_positions:
        unit = replace(unit, failed_positions=unit.failed_positions + (zone,))
        tables.put_unit(unit)
        tables.add_tag(unit, FAILED_POSITION_TAG + zone)


_STEP_SHOWN = frozenset(
    {"step", "kind", "index", "result", "started_t_s", "zone", "failed_positions", EVIDENCE_KEY}
)


def _step_completed(tables: DerivedTables, stored: StoredEvent, event: ev.StepCompleted) -> None:
    """Pick, check and confirm steps get one row each; fasten steps have a row per attempt."""
    unit = _unit_for(tables, stored)
    tables.put_unit(replace(unit, current_step=None))
    if event.step_kind == "fasten":
        return
    tables.add_step(
        StepRow(
            seq=stored.seq,
            serial=unit.serial,
            pass_no=unit.passes,
            step=event.step or "?",
            kind=event.step_kind or "?",
            result=_result(event.result),
            ended_t_s=event.t_s,
            recorded_at_s=stored.recorded_at_s,
            position=event.zone or None,
            started_t_s=event.started_t_s,
            evidence_path=event.evidence_path or None,
            detail=_rest(event, _STEP_SHOWN),
        )
    )


def _unit_ended(tables: DerivedTables, stored: StoredEvent, event: ev.UnitEnded) -> None:
    unit = _unit_for(tables, stored)
    result = _result(event.result)
    cycle_s = event.cycle_time_s
    first = unit.passes == 1
    zones = tuple(ref.zone for ref in event.failed_positions)
    missed = tuple(z for z in zones if z not in unit.failed_positions)
    for zone in missed:  # only when the log lacks the position_failed event
        tables.add_tag(unit, FAILED_POSITION_TAG + zone)
    failed = unit.failed_positions + missed
    tables.put_unit(
        replace(
            unit,
            status=result,
            open_seq=None,
            current_step=None,
            result=result,
            first_result=result if first and unit.first_result is None else unit.first_result,
            ended_by=event.ended_by or None,
            released=event.released,
            first_time_through=first
            and result == RESULT_OK
            and unit.retries == 0
            and not unit.reworked,
            ended_t_s=event.t_s,
            ended_at_s=stored.recorded_at_s,
            cycle_time_s=cycle_s if first else unit.cycle_time_s,
            rework_time_s=unit.rework_time_s + (0.0 if first else cycle_s),
            failed_positions=failed,
            unfinished_positions=tuple(ref.zone for ref in event.unfinished_positions),
        )
    )


_ALARM_SHOWN = frozenset({"code", "severity", "subject", "message"})


def _alarm_raised(tables: DerivedTables, stored: StoredEvent, event: ev.AlarmRaised) -> None:
    code = event.code or "unknown"
    tables.add_alarm(
        AlarmRow(
            seq=stored.seq,
            serial=event.serial,
            t_s=event.t_s,
            recorded_at_s=stored.recorded_at_s,
            code=code,
            severity=event.severity or "alarm",
            subject=event.subject,
            message=event.message,
            detail=_rest(event, _ALARM_SHOWN),
        )
    )
    if event.serial is not None:
        unit = _unit_for(tables, stored)
        unit = replace(unit, alarm_count=unit.alarm_count + 1)
        tables.put_unit(unit)
        tables.add_tag(unit, ALARM_TAG + code)


def project(stored: StoredEvent, tables: DerivedTables) -> None:
    """Fold one stored event into the derived rows; kinds that make no row change nothing."""
    event = stored.event
    match event:
        case ev.AlarmRaised():
            _alarm_raised(tables, stored, event)
        case ev.AlarmCleared() if event.code:
            tables.clear_alarm(event.code, event.subject, event.t_s)
    if event.serial is None:
        return
    match event:
        case ev.UnitStarted():
            _unit_started(tables, stored, event)
        case ev.StepStarted():
            _step_started(tables, stored, event)
        case ev.TighteningResult():
            _tightening_result(tables, stored, event)
        case ev.PositionCompleted():
            _position_decided(tables, stored, event, RESULT_OK)
        case ev.PositionFailed():
            _position_decided(tables, stored, event, RESULT_NOK)
        case ev.StepCompleted():
            _step_completed(tables, stored, event)
        case ev.UnitEnded():
            _unit_ended(tables, stored, event)
