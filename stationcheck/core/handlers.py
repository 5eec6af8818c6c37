"""One handler per (phase, input) row of the transition table in :mod:`transitions`.

A handler records what the input means (events, state changes) through the transaction; the
timers, alarm conditions and the enable output are settled afterwards for every input alike.
"""

from __future__ import annotations

from typing import Any

from stationcheck.core.events import RESULT_NOK, RESULT_OK
from stationcheck.core.flow import abandon_unit, complete_step, end_unit, next_position, open_unit
from stationcheck.core.observations import (
    Abort,
    BinActivity,
    CameraMoved,
    CheckVerdict,
    DetectorFault,
    FrameStale,
    LinkEvent,
    LinkStatus,
    ObservationBase,
    OperatorAck,
    PictureState,
    Reset,
    TighteningResult,
    ToolRunning,
    UnitStarted,
    ZoneObservation,
)
from stationcheck.core.plan import CheckStep, FastenStep, Limits
from stationcheck.core.transaction import Transaction

TORQUE_UNIT = "N·m"
ANGLE_UNIT = "deg"


def ignore(tx: Transaction, obs: ObservationBase) -> None:
    """The input means nothing in this phase (time still passes: timers are settled)."""


def start_unit(tx: Transaction, obs: UnitStarted) -> None:
    open_unit(tx, obs)


def replace_unit(tx: Transaction, obs: UnitStarted) -> None:
    """A serial while a unit is open: the same serial again is a repeat and changes nothing;
    another serial ends the open unit unreleased and starts the new one."""
    unit = tx.unit
    assert unit is not None
    if obs.serial == unit.serial and obs.rework == unit.rework:
        tx.alarm(
            "unit_already_open",
            subject=obs.serial,
            message=f"unit {obs.serial} started again while open; kept as it was",
        )
        return
    tx.alarm(
        "unit_interrupted",
        subject=unit.serial,
        message=f"unit {obs.serial} started while {unit.serial} was open; it ends unreleased",
    )
    abandon_unit(tx, "new_unit", reason=f"unit {obs.serial} started")
    open_unit(tx, obs)


def abort_unit(tx: Transaction, obs: Abort) -> None:
    abandon_unit(tx, "abort", obs.reason)
    tx.set_control(running_for=None, result_pending=False, credit_for=None)


def reset_station(tx: Transaction, obs: Reset) -> None:
    """Forget what was granted; the tip must dwell again before the tool is enabled."""
    tx.emit("station_reset", reason=obs.reason)
    tx.set_control(
        enabled_for=None,
        running_for=None,
        attempt_started_t_s=None,
        result_pending=False,
        credit_for=None,
        hold_off_until_t_s=tx.now_t_s + tx.index.dwell_ms / 1000.0,
        hold_off_reason="reset_hold",
        quiet_visit=tx.state.tool.visit,
    )


def _is_new_result(tx: Transaction, obs: TighteningResult) -> bool:
    """Same controller sequence number as the last one: a repeated report, not a new result."""
    if obs.sequence is not None and obs.sequence == tx.state.control.last_sequence:
        tx.alarm(
            "duplicate_result",
            subject=str(obs.sequence),
            message=f"tightening result {obs.sequence} reported again; ignored",
        )
        tx.set_control(result_status="rejected_duplicate")
        return False
    if obs.sequence is not None:
        tx.set_control(last_sequence=obs.sequence)
    return True


def _value(value: float | None, limits: Limits | None, unit: str) -> dict[str, Any]:
    return {
        "value": value,
        "low": limits.low if limits else None,
        "high": limits.high if limits else None,
        "unit": unit,
    }


def _within_limits(obs: TighteningResult, step: FastenStep) -> bool:
    pairs = ((obs.torque_nm, step.torque_nm), (obs.angle_deg, step.angle_deg))
    return all(limits is None or value is None or limits.contains(value) for value, limits in pairs)


def _reject(tx: Transaction, obs: TighteningResult, reason: str = "not_enabled") -> None:
    """Logged, never credited; ``reason`` says why (see :data:`REJECT_REASONS`)."""
    tx.alarm(
        "result_without_enable",
        subject=str(obs.sequence) if obs.sequence is not None else "",
        message=f"tightening result rejected: {REJECT_REASONS[reason]}",
        reason=reason,
        result=RESULT_OK if obs.ok else RESULT_NOK,
        torque_nm=obs.torque_nm,
        angle_deg=obs.angle_deg,
        sequence=obs.sequence,
    )
    tx.set_control(
        running_for=None, result_pending=False, credit_for=None, result_status=f"rejected_{reason}"
    )


REJECT_REASONS: dict[str, str] = {
    "not_enabled": "no fastener position is enabled (no unit, or not a fasten step)",
    "not_credited": "the run did not start while the tool was enabled at the target position",
}


def reject_result(tx: Transaction, obs: TighteningResult) -> None:
    if _is_new_result(tx, obs):
        _reject(tx, obs)


def take_result(tx: Transaction, obs: TighteningResult) -> None:
    """Controller OK/NOK is authoritative; an OK outside the configured limits still counts as
    OK and raises a ``result_outside_limits`` warning."""
    if not _is_new_result(tx, obs):
        return
    step, target, control = tx.fasten_step(), tx.target(), tx.state.control
    if step is None or target is None:
        _reject(tx, obs)
        return
    if control.credit_for != target.ref:  # only a run that started enabled here counts
        _reject(tx, obs, "not_credited")
        return
    unit = tx.unit
    assert unit is not None
    attempt = target.attempts + 1
    within = _within_limits(obs, step)
    where = {"step": step.id, "zone": target.ref.zone, "position": target.number}
    tx.emit(
        "tightening_result",
        **where,
        attempt=attempt,
        max_attempts=step.max_attempts,
        rework=unit.rework,
        result=RESULT_OK if obs.ok else RESULT_NOK,
        torque=_value(obs.torque_nm, step.torque_nm, TORQUE_UNIT),
        angle=_value(obs.angle_deg, step.angle_deg, ANGLE_UNIT),
        within_limits=within,
        sequence=obs.sequence,
        started_t_s=control.attempt_started_t_s,
        ended_t_s=tx.now_t_s,
        **({"run_cut": control.run_cut} if control.run_cut else {}),
    )
    if control.run_cut:
        tx.alarm(
            "result_of_cut_run",
            subject=target.ref.zone,
            message=f"result for {tx.index.label(target.ref.zone)} after its enable was cut "
            f"({control.run_cut}); check the fastener",
        )
    if obs.ok and not within:
        tx.alarm(
            "result_outside_limits",
            subject=target.ref.zone,
            message="the controller said OK but torque or angle is outside the configured limits",
        )
    # every attempt is granted on its own: enable drops at the result and the tip dwells again
    tx.set_control(
        enabled_for=None,
        running_for=None,
        result_pending=False,
        credit_for=None,
        result_status="accepted",
        attempt_started_t_s=None,
        run_cut="",
        hold_off_until_t_s=tx.now_t_s + tx.index.dwell_ms / 1000.0,
        hold_off_reason="new_attempt_dwell",
    )
    if obs.ok:
        tx.emit("position_completed", **where, attempts=attempt, rework=unit.rework)
        next_position(tx)
    elif attempt >= step.max_attempts:
        tx.emit("position_failed", **where, attempts=attempt, rework=unit.rework)
        if step.on_failure == "stop_unit":
            end_unit(
                tx, RESULT_NOK, ended_by="stopped_on_failure", reason=f"{target.ref.zone} failed"
            )
        else:
            next_position(tx)


def note_running(tx: Transaction, obs: ToolRunning) -> None:
    control, target = tx.state.control, tx.target()
    if obs.on == control.running:
        return
    if not obs.on:
        tx.set_control(running=False, running_for=None, run_started_t_s=None)
        tx.emit("run_stopped", awaiting_result=control.result_pending)
        return
    if control.result_pending:
        tx.alarm(
            "run_without_result",
            subject="",
            message="the previous tightening run ended without a result",
        )
    if control.enabled and target is not None and control.enabled_for == target.ref:
        tx.set_control(
            running=True,
            running_for=target.ref,
            result_pending=True,
            credit_for=target.ref,
            attempt_started_t_s=tx.now_t_s,
            run_started_t_s=tx.now_t_s,
            run_cut="",
        )
        tx.emit("run_started", step=target.ref.step, zone=target.ref.zone, position=target.number)
        return
    tx.set_control(running=True, result_pending=False, credit_for=None, run_started_t_s=tx.now_t_s)
    tx.alarm(
        "ran_while_inhibited",
        subject="",
        message="the tool reported running while it was not enabled",
    )


def note_zone(tx: Transaction, obs: ZoneObservation) -> None:
    known = obs.zone in tx.index.zone_kinds
    last = tx.state.tool.last_frame_t_s
    tx.set_tool(
        last_frame_t_s=obs.t_s if last is None else max(last, obs.t_s),
        frame_age_ms=obs.frame_age_ms,
        frozen_ms=obs.frozen_ms,
        visible=obs.visible,
        seen=obs.visible and obs.seen,
        seen_once=tx.state.tool.seen_once or obs.visible,
        zone=obs.zone if known else None,
        arrived_zone=obs.arrived_zone if known else None,
        visit_since_t_s=obs.since_t_s if known else None,
    )
    tx.set_health(frame_stale=False, detector_fault=None)


def note_bin_activity(tx: Transaction, obs: BinActivity) -> None:
    bins = dict(tx.state.active_bins)
    if obs.active:
        bins.setdefault(obs.zone, tx.now_t_s)
    else:
        bins.pop(obs.zone, None)
    tx.set(active_bins=tuple(sorted(bins.items())))


def judge_check(tx: Transaction, obs: CheckVerdict) -> None:
    """Only a verdict that comes while the step is current counts; undecided never passes, and
    nothing passes while the camera is moved (the zone would be in the wrong place)."""
    step = tx.plan_step()
    if not isinstance(step, CheckStep) or obs.zone != step.zone:
        return
    if obs.verdict != tx.state.check_verdict:
        tx.emit(
            "check_verdict",
            step=step.id,
            zone=step.zone,
            verdict=obs.verdict,
            expect=step.expect,
            margin=obs.margin,
        )
        tx.set(check_verdict=obs.verdict)
    health = tx.state.health
    if obs.verdict == step.expect and not health.camera_moved and health.cannot_judge is None:
        complete_step(
            tx,
            RESULT_OK,
            zone=step.zone,
            expect=step.expect,
            verdict=obs.verdict,
            margin=obs.margin,
        )


def fail_check(tx: Transaction, obs: OperatorAck) -> None:
    """An acknowledge while the check has not said what it must (no verdict yet, undecided or
    the wrong one): the check fails and the unit ends not released. A passing verdict completes
    the step as it arrives, so an acknowledge can only meet one while the camera is moved; then
    it is ignored and the unit stays open and inhibited."""
    step = tx.plan_step()
    if not isinstance(step, CheckStep):
        return
    verdict = tx.state.check_verdict
    if verdict == step.expect:
        return
    tx.alarm(
        "check_failed",
        subject=step.zone,
        message=f"check {step.id} acknowledged while {step.zone} did not show {step.expect}",
        step=step.id,
        expect=step.expect,
        verdict=verdict,
    )
    end_unit(
        tx,
        RESULT_NOK,
        ended_by="check_failed",
        reason=f"check {step.id} failed",
        failed_checks=({"step": step.id, "zone": step.zone},),
        zone=step.zone,
        expect=step.expect,
        verdict=verdict,
    )


def confirm_step(tx: Transaction, obs: OperatorAck) -> None:
    complete_step(tx, RESULT_OK)


def note_camera(tx: Transaction, obs: CameraMoved) -> None:
    tx.set_health(camera_moved=obs.moved, shift_px=obs.shift_px)


def note_picture(tx: Transaction, obs: PictureState) -> None:
    """The picture's state; its figures go to the open unit's log."""
    reason = obs.reason or "poor picture"
    tx.set_health(
        cannot_judge=None if obs.judgeable else reason,
        camera_unchecked=None if obs.camera_checkable else reason,
    )
    if tx.unit is not None and tx.unit.is_open:
        tx.emit(
            "picture_quality",
            judgeable=obs.judgeable,
            camera_checkable=obs.camera_checkable,
            reason=obs.reason,
            brightness=obs.brightness,
            contrast=obs.contrast,
            noise_sigma=obs.noise_sigma,
            sharpness=obs.sharpness,
            blockiness=obs.blockiness,
        )


def note_link(tx: Transaction, obs: LinkStatus) -> None:
    """A lost link also ends the hold of a running tightening: enable is off and stays off
    until the tip is back at the target."""
    tx.set_health(link_ok=obs.ok)
    if not obs.ok:
        tx.set_control(running_for=None)


def note_detector_fault(tx: Transaction, obs: DetectorFault) -> None:
    tx.set_health(detector_fault=obs.reason)


def note_frame_stale(tx: Transaction, obs: FrameStale) -> None:
    tx.set_health(frame_stale=True)


def note_link_event(tx: Transaction, obs: LinkEvent) -> None:
    tx.alarm(obs.code, subject="plc", message=obs.detail)
