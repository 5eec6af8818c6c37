"""How a unit moves through its steps: open, next step, next position, close.

A rework pass keeps only the fasten positions it was given (in their original tightening order
and numbering) and every check step (a unit is never released unchecked); picks and confirms
were done on the first pass and are left out.
"""

from __future__ import annotations

from typing import Any

from stationcheck.core.events import RESULT_NOK, RESULT_OK, RESULT_UNDECIDED
from stationcheck.core.observations import PositionRef, UnitStarted
from stationcheck.core.plan import FastenStep
from stationcheck.core.step_kinds import STEP_KINDS
from stationcheck.core.transaction import PlanIndex, Transaction


def _refs(refs: tuple[PositionRef, ...]) -> list[dict[str, str]]:
    return [ref.to_dict() for ref in refs]


def plan_pass(
    index: PlanIndex, started: UnitStarted
) -> tuple[list[dict[str, str]], list[dict[str, Any]], list[PositionRef]]:
    """Steps and positions of this pass, and requested rework positions the plan does not have."""
    wanted = set(started.rework_positions)
    known: set[PositionRef] = set()
    steps: list[dict[str, str]] = []
    positions: list[dict[str, Any]] = []
    for step in index.plan.steps:
        if isinstance(step, FastenStep):
            refs = [PositionRef(step.id, zone) for zone in step.zones]
            known.update(refs)
            kept = [
                (number, ref)
                for number, ref in enumerate(refs, start=1)
                if not started.rework or ref in wanted
            ]
            if kept:
                steps.append({"id": step.id, "kind": step.kind})
                positions.extend({**ref.to_dict(), "number": number} for number, ref in kept)
        elif not started.rework or STEP_KINDS[step.kind].on_rework == "keep":
            steps.append({"id": step.id, "kind": step.kind})
    unknown = [ref for ref in started.rework_positions if ref not in known]
    return steps, positions, unknown


def open_unit(tx: Transaction, started: UnitStarted) -> None:
    steps, positions, unknown = plan_pass(tx.index, started)
    opens = not started.rework or bool(positions)
    if opens:
        tx.emit(
            "unit_started",
            serial=started.serial,
            station=tx.index.plan.station,
            rework=started.rework,
            steps=steps,
            positions=positions,
            rework_positions=_refs(started.rework_positions),
            **({"demo_data": True} if tx.index.plan.demo_data else {}),
            **({"model_sha256": tx.index.plan.model_sha256} if tx.index.plan.model_sha256 else {}),
        )
    for ref in unknown:
        tx.alarm(
            "unknown_rework_position",
            subject=f"{ref.step}/{ref.zone}",
            message=f"rework asked for {ref.zone} in step {ref.step}, which the station lacks",
        )
    if opens:
        begin_step(tx, 0)
        return
    tx.alarm(
        "rework_nothing_to_do",
        subject=started.serial,
        message=f"rework of {started.serial} requested but no known position to rework",
    )


def begin_step(tx: Transaction, index: int) -> None:
    unit = tx.unit
    assert unit is not None
    if index >= len(unit.steps):
        end_unit(tx, RESULT_NOK if unit.failed_positions else RESULT_OK, ended_by="completed")
        return
    entry = unit.steps[index]
    tx.emit("step_started", step=entry.id, kind=entry.kind, index=index, count=len(unit.steps))
    tx.set(check_verdict=None)
    new_target(tx)


def new_target(tx: Transaction) -> None:
    """The target changed: nothing is granted yet, and the visit the tip is on is not flagged."""
    tx.set_control(
        enabled_for=None,
        running_for=None,
        attempt_started_t_s=None,
        quiet_visit=tx.state.tool.visit,
    )


def finish_step(tx: Transaction, result: str, ended_by: str, **extra: Any) -> None:
    unit = tx.unit
    assert unit is not None
    entry = unit.current_step
    if entry is None:
        return
    failed = tuple(p.ref for p in unit.positions_of(entry.id) if p.result == RESULT_NOK)
    tx.emit(
        "step_completed",
        step=entry.id,
        kind=entry.kind,
        index=unit.step_index,
        result=result,
        ended_by=ended_by,
        started_t_s=unit.step_started_t_s,
        failed_positions=_refs(failed),
        **extra,
    )


def complete_step(tx: Transaction, result: str = RESULT_OK, **extra: Any) -> None:
    """Close the current step and move on to the next one (or close the unit)."""
    unit = tx.unit
    assert unit is not None
    finish_step(tx, result, "completed", **extra)
    begin_step(tx, unit.step_index + 1)


def next_position(tx: Transaction) -> None:
    """After a position is decided: the next one in order, or the next step."""
    unit = tx.unit
    assert unit is not None
    if unit.current_position is not None:
        new_target(tx)
        return
    step_id = unit.steps[unit.step_index].id
    failed = any(p.result == RESULT_NOK for p in unit.positions_of(step_id))
    complete_step(tx, RESULT_NOK if failed else RESULT_OK)


def end_unit(
    tx: Transaction,
    result: str,
    ended_by: str,
    reason: str = "",
    failed_checks: tuple[dict[str, str], ...] = (),
    **step_extra: Any,
) -> None:
    """Close the unit; when it ends early its current step is closed first (``step_extra``
    goes into that step's ``step_completed``)."""
    unit = tx.unit
    assert unit is not None
    if ended_by != "completed":
        step_result = RESULT_NOK if result == RESULT_NOK else RESULT_UNDECIDED
        finish_step(tx, step_result, ended_by, **step_extra)
    unit = tx.unit
    assert unit is not None
    tx.emit(
        "unit_ended",
        result=result,
        released=result == RESULT_OK,
        ended_by=ended_by,
        reason=reason,
        rework=unit.rework,
        failed_positions=_refs(unit.failed_positions),
        unfinished_positions=_refs(unit.unfinished_positions),
        failed_checks=list(failed_checks),
        started_t_s=unit.started_t_s,
        cycle_time_s=tx.now_t_s - unit.started_t_s,
        alarms=list(unit.alarms),
    )
    tx.set_control(
        enabled_for=None,
        running_for=None,
        attempt_started_t_s=None,
        result_pending=False,
        credit_for=None,
    )
    tx.set(check_verdict=None)


def abandon_unit(tx: Transaction, ended_by: str, reason: str) -> None:
    """End the open unit unreleased (abort, or a new serial arrived)."""
    if tx.unit is not None:
        end_unit(tx, RESULT_UNDECIDED, ended_by=ended_by, reason=reason)
