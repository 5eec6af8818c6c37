"""Events -> derived rows (units, steps, alarms, unit tags): the one place that decides what a
row says.

Both logs run this same fold: the SQLite log inside the transaction that inserts the events (and
again in ``rebuild``), the in-memory log over plain dicts. It reads only the events (and the rows
it made from earlier events), never a clock. Unknown event kinds and unknown data keys are
ignored; a missing key leaves its column empty rather than failing the station's write.
"""

from __future__ import annotations

import logging
from collections.abc import Callable, Mapping
from dataclasses import replace
from typing import Any, Protocol

from stationcheck.core.events import RESULT_NOK, RESULT_OK, RESULT_UNDECIDED
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
_KNOWN_ALARM_KEYS = {"code", "severity", "subject", "message"}


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


def _float(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, int | float):
        return None
    return float(value)


def _int(value: Any) -> int | None:
    return value if isinstance(value, int) and not isinstance(value, bool) else None


def _text(value: Any) -> str | None:
    return value if isinstance(value, str) and value else None


def _or(value: float | None, default: float) -> float:
    return default if value is None else value


def _result(value: Any) -> str:
    return value if value in RESULTS else RESULT_UNDECIDED


def _zones(refs: Any) -> tuple[str, ...]:
    if not isinstance(refs, list):
        return ()
    return tuple(str(r["zone"]) for r in refs if isinstance(r, Mapping) and r.get("zone"))


def measured(data: Mapping[str, Any], name: str, unit: str) -> tuple[float | None, ...]:
    """(value, low, high) of a measured quantity: ``{name: {value, low, high, unit}}``, or a
    plain number under ``name`` or ``name_<unit>`` (e.g. ``torque_nm``)."""
    raw = data.get(name)
    if isinstance(raw, Mapping):
        if raw.get("unit", unit) != unit:
            logger.warning("%s given in %r, expected %r; stored as given", name, raw["unit"], unit)
        return _float(raw.get("value")), _float(raw.get("low")), _float(raw.get("high"))
    suffix = "_nm" if name == "torque" else "_deg"
    return _float(raw if raw is not None else data.get(name + suffix)), None, None


def _unit_for(tables: DerivedTables, stored: StoredEvent) -> UnitRow:
    """The unit the event belongs to; a log that starts mid-unit gets an open row for it."""
    serial = stored.event.serial
    assert serial is not None
    unit = tables.get_unit(serial)
    if unit is None:
        logger.warning("event %d (%s) for unit %s before its start", stored.seq,
                       stored.event.kind, serial)
        unit = UnitRow(serial=serial, status=UNIT_OPEN, passes=1, started_t_s=stored.event.t_s,
                       started_at_s=stored.recorded_at_s, open_seq=stored.seq)
    return unit


def _unit_started(tables: DerivedTables, stored: StoredEvent) -> None:
    event = stored.event
    assert event.serial is not None
    rework = bool(event.data.get("rework", False))
    unit = tables.get_unit(event.serial)
    if unit is None:
        unit = UnitRow(serial=event.serial, status=UNIT_OPEN, passes=1, started_t_s=event.t_s,
                       started_at_s=stored.recorded_at_s, open_seq=stored.seq, reworked=rework)
    else:
        unit = replace(unit, status=UNIT_OPEN, passes=unit.passes + 1, open_seq=stored.seq,
                       reworked=True, first_time_through=False, current_step=None,
                       unfinished_positions=())
    tables.put_unit(unit)


def _step_started(tables: DerivedTables, stored: StoredEvent) -> None:
    unit = _unit_for(tables, stored)
    tables.put_unit(replace(unit, current_step=_text(stored.event.data.get("step"))))


def _tightening_result(tables: DerivedTables, stored: StoredEvent) -> None:
    event, data = stored.event, stored.event.data
    unit = _unit_for(tables, stored)
    attempt = _int(data.get("attempt")) or 1
    result = _result(data.get("result"))
    torque, torque_low, torque_high = measured(data, "torque", TORQUE_UNIT)
    angle, angle_low, angle_high = measured(data, "angle", ANGLE_UNIT)
    within = data.get("within_limits")
    tables.add_step(StepRow(
        seq=stored.seq, serial=unit.serial, pass_no=unit.passes,
        step=_text(data.get("step")) or "?", kind="fasten", result=result,
        ended_t_s=_or(_float(data.get("ended_t_s")), event.t_s), recorded_at_s=stored.recorded_at_s,
        position=_text(data.get("zone")), position_number=_int(data.get("position")),
        attempt=attempt, max_attempts=_int(data.get("max_attempts")),
        torque_nm=torque, torque_low_nm=torque_low, torque_high_nm=torque_high,
        angle_deg=angle, angle_low_deg=angle_low, angle_high_deg=angle_high,
        within_limits=within if isinstance(within, bool) else None,
        sequence=_int(data.get("sequence")), started_t_s=_float(data.get("started_t_s")),
        evidence_path=_text(data.get(EVIDENCE_KEY)),
    ))
    tables.put_unit(replace(unit, retries=unit.retries + (attempt > 1),
                            nok_results=unit.nok_results + (result == RESULT_NOK)))


def _position_decided(result: str) -> Callable[[DerivedTables, StoredEvent], None]:
    def fold(tables: DerivedTables, stored: StoredEvent) -> None:
        data = stored.event.data
        unit = _unit_for(tables, stored)
        zone, step = _text(data.get("zone")), _text(data.get("step")) or "?"
        if zone is None:
            return
        tables.set_position_result(unit.serial, unit.passes, step, zone, result)
        if result == RESULT_NOK and zone not in unit.failed_positions:
            unit = replace(unit, failed_positions=unit.failed_positions + (zone,))
            tables.put_unit(unit)
            tables.add_tag(unit, FAILED_POSITION_TAG + zone)

    return fold


def _step_completed(tables: DerivedTables, stored: StoredEvent) -> None:
    """Pick, check and confirm steps get one row each; fasten steps have a row per attempt."""
    event, data = stored.event, stored.event.data
    unit = _unit_for(tables, stored)
    tables.put_unit(replace(unit, current_step=None))
    kind = _text(data.get("kind")) or "?"
    if kind == "fasten":
        return
    known = {"step", "kind", "index", "result", "started_t_s", "zone", "failed_positions",
             EVIDENCE_KEY}
    tables.add_step(StepRow(
        seq=stored.seq, serial=unit.serial, pass_no=unit.passes,
        step=_text(data.get("step")) or "?", kind=kind, result=_result(data.get("result")),
        ended_t_s=event.t_s, recorded_at_s=stored.recorded_at_s,
        position=_text(data.get("zone")), started_t_s=_float(data.get("started_t_s")),
        evidence_path=_text(data.get(EVIDENCE_KEY)),
        detail={k: v for k, v in data.items() if k not in known},
    ))


def _unit_ended(tables: DerivedTables, stored: StoredEvent) -> None:
    event, data = stored.event, stored.event.data
    unit = _unit_for(tables, stored)
    result = _result(data.get("result"))
    cycle_s = _float(data.get("cycle_time_s"))
    if cycle_s is None:
        started = _float(data.get("started_t_s"))
        cycle_s = event.t_s - started if started is not None else 0.0
    first = unit.passes == 1
    missed = tuple(z for z in _zones(data.get("failed_positions")) if z not in unit.failed_positions)
    for zone in missed:  # only when the log lacks the position_failed event
        tables.add_tag(unit, FAILED_POSITION_TAG + zone)
    failed = unit.failed_positions + missed
    tables.put_unit(replace(
        unit, status=result, open_seq=None, current_step=None, result=result,
        first_result=result if first and unit.first_result is None else unit.first_result,
        ended_by=_text(data.get("ended_by")), released=bool(data.get("released", result == RESULT_OK)),
        first_time_through=first and result == RESULT_OK and unit.retries == 0 and not unit.reworked,
        ended_t_s=event.t_s, ended_at_s=stored.recorded_at_s,
        cycle_time_s=cycle_s if first else unit.cycle_time_s,
        rework_time_s=unit.rework_time_s + (0.0 if first else cycle_s),
        failed_positions=failed, unfinished_positions=_zones(data.get("unfinished_positions")),
    ))


def _alarm_raised(tables: DerivedTables, stored: StoredEvent) -> None:
    event, data = stored.event, stored.event.data
    tables.add_alarm(AlarmRow(
        seq=stored.seq, serial=event.serial, t_s=event.t_s, recorded_at_s=stored.recorded_at_s,
        code=_text(data.get("code")) or "unknown", severity=_text(data.get("severity")) or "alarm",
        subject=str(data.get("subject") or ""), message=str(data.get("message") or ""),
        detail={k: v for k, v in data.items() if k not in _KNOWN_ALARM_KEYS},
    ))
    if event.serial is not None:
        unit = _unit_for(tables, stored)
        unit = replace(unit, alarm_count=unit.alarm_count + 1)
        tables.put_unit(unit)
        tables.add_tag(unit, ALARM_TAG + (_text(data.get("code")) or "unknown"))


def _alarm_cleared(tables: DerivedTables, stored: StoredEvent) -> None:
    data = stored.event.data
    code = _text(data.get("code"))
    if code is not None:
        tables.clear_alarm(code, str(data.get("subject") or ""), stored.event.t_s)


_FOLDS: dict[str, Callable[[DerivedTables, StoredEvent], None]] = {
    "unit_started": _unit_started,
    "step_started": _step_started,
    "tightening_result": _tightening_result,
    "position_completed": _position_decided(RESULT_OK),
    "position_failed": _position_decided(RESULT_NOK),
    "step_completed": _step_completed,
    "unit_ended": _unit_ended,
}
_STATION_FOLDS: dict[str, Callable[[DerivedTables, StoredEvent], None]] = {
    "alarm_raised": _alarm_raised,
    "alarm_cleared": _alarm_cleared,
}


def project(stored: StoredEvent, tables: DerivedTables) -> None:
    """Fold one stored event into the derived rows."""
    kind = stored.event.kind
    fold = _STATION_FOLDS.get(kind)
    if fold is None and stored.event.serial is not None:
        fold = _FOLDS.get(kind)
    if fold is not None:
        fold(tables, stored)
