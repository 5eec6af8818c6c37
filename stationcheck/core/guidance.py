"""Turns the sequencer state into the station outputs and plain-worded operator guidance."""

from __future__ import annotations

from stationcheck.core.events import RESULT_NOK, RESULT_OK
from stationcheck.core.outputs import Guidance, Output, UnitStatus
from stationcheck.core.plan import CheckStep, ConfirmStep, FastenStep, PickStep
from stationcheck.core.progress import UnitProgress
from stationcheck.core.state import SequencerState
from stationcheck.core.transaction import PlanIndex

BLOCKING_WORDS = {
    "link_lost": "the PLC link is down",
    "camera_moved": "the camera has moved; call setup to check it",
    "camera_unchecked": "the picture is too dark or too noisy to check the camera",
    "cannot_judge": "the picture is too poor to judge the bins and checks",
    "detector_fault": "tool detection failed",
    "frame_stale": "no fresh camera image",
    "image_frozen": "the camera picture is frozen",
    "run_too_long": "the tool ran too long; let go of the trigger",
}


def unit_status(unit: UnitProgress | None) -> UnitStatus:
    if unit is None:
        return "idle"
    if unit.is_open:
        return "running"
    if unit.result == RESULT_OK:
        return "ok"
    if unit.result == RESULT_NOK:
        return "nok"
    return "aborted"


def _finished(index: PlanIndex, unit: UnitProgress) -> Guidance:
    if unit.result == RESULT_OK:
        words = f"Unit {unit.serial} done: OK. Waiting for the next unit."
    elif unit.result == RESULT_NOK and unit.ended_by == "check_failed":
        step = index.steps.get(unit.steps[unit.step_index].id)
        where = index.label(step.zone) if isinstance(step, CheckStep) else "a check"
        words = f"Unit {unit.serial} not released: the check at {where} failed."
    elif unit.result == RESULT_NOK:
        labels = ", ".join(index.label(ref.zone) for ref in unit.failed_positions) or "none"
        words = f"Unit {unit.serial} not released: rework needed at {labels}."
    else:
        words = f"Unit {unit.serial} ended unfinished ({unit.ended_by}). Waiting for the next unit."
    return Guidance("unit_finished", None, words)


def _alarm_subject(state: SequencerState, code: str) -> str | None:
    for alarm in state.alarms:
        if alarm.code == code:
            return alarm.subject
    return None


def guide(index: PlanIndex, state: SequencerState) -> Guidance:
    unit = state.open_unit
    if unit is None:
        if state.unit is not None:
            return _finished(index, state.unit)
        return Guidance("wait_for_unit", None, "Waiting for a unit.")
    step = index.steps.get(unit.current_step.id) if unit.current_step else None
    target = unit.current_position
    target_zone = target.ref.zone if target is not None else getattr(step, "zone", None)
    blocking = [code for code in BLOCKING_WORDS if _alarm_subject(state, code) is not None]
    if blocking and not state.control.enabled:
        return Guidance("inhibited", target_zone, f"Tool off: {BLOCKING_WORDS[blocking[0]]}.")
    if isinstance(step, FastenStep) and target is not None:
        label = index.label(target.ref.zone)
        wrong = _alarm_subject(state, "wrong_position")
        if wrong is not None:
            words = f"Wrong position: this is {index.label(wrong)}. Go to {label}."
            return Guidance("wrong_position", target.ref.zone, words)
        if _alarm_subject(state, "tool_lost") is not None:
            return Guidance("show_tool", target.ref.zone, f"Tool not in view. Bring it to {label}.")
        detail = (
            f"order {target.number} of {len(step.zones)}, "
            f"attempt {target.attempts + 1} of {step.max_attempts}"
        )
        if unit.rework:
            return Guidance("rework", target.ref.zone, f"Rework {label} ({detail}).")
        return Guidance("fasten", target.ref.zone, f"Fasten {label} ({detail}).")
    if isinstance(step, PickStep):
        wrong = _alarm_subject(state, "wrong_bin")
        if wrong is not None:
            words = f"Wrong bin: {index.label(wrong)}. Take a part from {index.label(step.zone)}."
            return Guidance("wrong_bin", step.zone, words)
        return Guidance("take_part", step.zone, f"Take a part from {index.label(step.zone)}.")
    if isinstance(step, CheckStep):
        words = f"Make sure {index.label(step.zone)} is {step.expect}."
        if state.check_verdict is not None and state.check_verdict != step.expect:
            words += f" Seen now: {state.check_verdict}."
        return Guidance("check", step.zone, words)
    if isinstance(step, ConfirmStep):
        return Guidance("acknowledge", None, f"{step.prompt.rstrip('.')}. Then acknowledge.")
    return Guidance("wait_for_unit", None, "Waiting for a unit.")


def render_output(index: PlanIndex, state: SequencerState) -> Output:
    unit = state.open_unit
    target = unit.current_position if unit is not None else None
    step = unit.current_step if unit is not None else None
    shown = unit if unit is not None else state.unit
    fasten = index.steps.get(step.id) if step is not None else None
    return Output(
        t_s=state.now_t_s if state.now_t_s is not None else 0.0,
        tool_enabled=state.control.enabled,
        guidance=guide(index, state),
        unit_status=unit_status(state.unit),
        serial=shown.serial if shown is not None else None,
        rework=shown.rework if shown is not None else False,
        step_id=step.id if step is not None else None,
        step_number=unit.step_index + 1 if unit is not None and step is not None else 0,
        step_count=len(unit.steps) if unit is not None else 0,
        target=target.ref if target is not None else None,
        position_number=target.number if target is not None else 0,
        attempt=target.attempts + 1 if target is not None and fasten is not None else 0,
        failed_positions=shown.failed_positions if shown is not None else (),
        alarms=tuple(sorted({alarm.code for alarm in state.alarms})),
        enable_reason=state.control.reason,
        ended_by=shown.ended_by if shown is not None else None,
        result_status=state.control.result_status,
        last_event=state.last_event,
        event_count=state.event_count,
    )
