"""What is settled after every input, whatever it was: timers, condition alarms, the enable output.

Enable (fail towards inhibit) is on only when, in this order:
1. the PLC link is up and a fasten step has a target position; then
2. no fault: no camera move, a picture good enough to check the camera and judge bins, no
   detector fault, a fresh frame whose picture still changes, a
   visible tip (an occlusion shorter than ``lost_track_grace_ms`` is not a loss); then
3. a tightening granted at that position is running, within its run-time limit and with the tip
   still in the target zone (hysteresis absorbs the tool's reaction wobble), or
4. the tip has arrived (dwelled) in the target zone, no hold after a reset or a result is on
   (the tip dwells again from then: ``reset_hold`` / ``new_attempt_dwell``), and, to turn the
   enable on, the tip was measured in this frame (a tip held through the lost-track grace keeps
   an enable but never grants one).

A fault or a leaving tip during a running tightening drops the enable at once and ends that
run's grant (``run_cut``): while the tool goes on running without a grant (cut, past its limit,
or started while inhibited) the enable stays off until it stops. The result that follows a cut
run still counts (the controller's verdict; usually NOK) and is flagged.
"""

from __future__ import annotations

from typing import Any

from stationcheck.core.events import RESULT_OK
from stationcheck.core.flow import complete_step
from stationcheck.core.plan import PickStep
from stationcheck.core.state import ActiveAlarm, SequencerState
from stationcheck.core.timing import elapsed_ms, exceeded, reached
from stationcheck.core.transaction import PlanIndex, Transaction

Details = dict[str, Any]


def frame_is_fresh(state: SequencerState, index: PlanIndex) -> bool:
    tool, now = state.tool, state.now_t_s
    if state.health.frame_stale or tool.last_frame_t_s is None or now is None:
        return False
    age_ms = max(elapsed_ms(tool.last_frame_t_s, now), tool.frame_age_ms)
    return not exceeded(age_ms, index.stale_frame_ms)


def image_is_frozen(state: SequencerState, index: PlanIndex) -> bool:
    return reached(state.tool.frozen_ms, index.stale_frame_ms)


def run_limit_ms(tx: Transaction) -> float:
    step = tx.fasten_step()
    if step is not None and step.max_run_ms is not None:
        return step.max_run_ms
    return tx.index.max_run_ms


def check_run_time(tx: Transaction) -> None:
    """A granted run past its limit loses its grant (a stuck tool_running, a welded contactor)."""
    control, target = tx.state.control, tx.target()
    if target is None or control.running_for != target.ref or control.run_started_t_s is None:
        return
    if exceeded(elapsed_ms(control.run_started_t_s, tx.now_t_s), run_limit_ms(tx)):
        tx.set_control(running_for=None, run_cut="run_too_long")


def complete_pick_if_due(tx: Transaction) -> None:
    """Activity in the step's bin for ``min_time_ms`` (counted from the step's start)."""
    step, unit = tx.plan_step(), tx.unit
    health = tx.state.health
    if not isinstance(step, PickStep) or unit is None or health.camera_moved:
        return
    if health.cannot_judge is not None:
        return  # fail closed: a pick the picture cannot show is not confirmed
    since = tx.state.bin_active_since(step.zone)
    if since is None or unit.step_started_t_s is None:
        return
    active_ms = elapsed_ms(max(since, unit.step_started_t_s), tx.now_t_s)
    if reached(active_ms, step.min_time_ms):
        complete_step(tx, RESULT_OK, zone=step.zone, active_ms=active_ms)


def _station_conditions(tx: Transaction) -> list[tuple[ActiveAlarm, Details]]:
    state, found = tx.state, []
    health = state.health
    if not health.link_ok:
        found.append((ActiveAlarm("link_lost"), {"message": "the PLC link is down"}))
    if health.camera_moved:
        message = f"the camera moved by about {health.shift_px:.1f} px"
        found.append((ActiveAlarm("camera_moved"), {"message": message}))
    if health.cannot_judge is not None:
        message = f"cannot judge bins and checks: {health.cannot_judge}"
        found.append((ActiveAlarm("cannot_judge"), {"message": message}))
    if health.camera_unchecked is not None:
        message = f"cannot check the camera's position: {health.camera_unchecked}"
        found.append((ActiveAlarm("camera_unchecked"), {"message": message}))
    if health.detector_fault is not None:
        message = f"the keypoint detector failed: {health.detector_fault}"
        found.append((ActiveAlarm("detector_fault"), {"message": message}))
    if state.tool.last_frame_t_s is not None and not frame_is_fresh(state, tx.index):
        found.append((ActiveAlarm("frame_stale"), {"message": "no fresh camera frame"}))
    elif image_is_frozen(state, tx.index):
        message = f"the camera picture has not changed for {state.tool.frozen_ms:.0f} ms"
        found.append((ActiveAlarm("image_frozen"), {"message": message}))
    control = state.control
    if control.running and control.run_cut == "run_too_long":
        found.append(_run_too_long(tx))
    return found


def _run_too_long(tx: Transaction) -> tuple[ActiveAlarm, Details]:
    target = tx.target()
    zone = target.ref.zone if target is not None else ""
    where = tx.index.label(zone) if zone else "the position"
    message = f"the tool ran longer than {run_limit_ms(tx):.0f} ms at {where}; enable dropped"
    return ActiveAlarm("run_too_long", zone), {"message": message, "zone": zone}


def _unit_conditions(tx: Transaction) -> list[tuple[ActiveAlarm, Details]]:
    state, index, found = tx.state, tx.index, []
    tool, phase, target = state.tool, tx.phase, tx.target()
    if phase == "fasten" and tool.seen_once and not tool.visible:
        found.append((ActiveAlarm("tool_lost"), {"message": "the tool is out of view"}))
    wrong = tool.arrived_zone
    if (
        target is not None
        and index.is_kind(wrong, "fastener")
        and wrong != target.ref.zone
        and tool.visit != state.control.quiet_visit
    ):
        assert wrong is not None
        message = (
            f"tool at {index.label(wrong)}; the next position is {index.label(target.ref.zone)}"
        )
        details = {"message": message, "expected": target.ref.zone}
        found.append((ActiveAlarm("wrong_position", wrong), details))
    return found + _wrong_bins(tx)


def _picked_just_before(tx: Transaction) -> str | None:
    """The bin of the step before the current one, if that step was a pick."""
    unit = tx.unit
    if unit is None or unit.step_index < 1:
        return None
    previous = tx.index.steps.get(unit.steps[unit.step_index - 1].id)
    return previous.zone if isinstance(previous, PickStep) else None


def _wrong_bins(tx: Transaction) -> list[tuple[ActiveAlarm, Details]]:
    """Activity in another bin for the pick's ``min_time_ms`` (counted from the later of the
    activity's start and the step's start); a graze on the way to the right bin is not one."""
    step, unit, index = tx.plan_step(), tx.unit, tx.index
    found: list[tuple[ActiveAlarm, Details]] = []
    if not isinstance(step, PickStep) or unit is None or unit.step_started_t_s is None:
        return found
    if tx.state.health.camera_moved:
        return found  # the bin zones are in the wrong place
    started_t_s, picked = unit.step_started_t_s, _picked_just_before(tx)
    for zone, since in tx.state.active_bins:
        if zone == step.zone or not index.is_kind(zone, "bin"):
            continue
        if zone == picked and since < started_t_s:
            continue  # the bin just picked from, until activity there has ended
        if not reached(elapsed_ms(max(since, started_t_s), tx.now_t_s), step.min_time_ms):
            continue
        message = f"activity in {index.label(zone)}; take from {index.label(step.zone)}"
        found.append((ActiveAlarm("wrong_bin", zone), {"message": message, "expected": step.zone}))
    return found


def update_alarms(tx: Transaction) -> None:
    """Condition alarms are raised once when they start and cleared once when they end."""
    current = _station_conditions(tx) + _unit_conditions(tx)
    active = [alarm for alarm, _ in current]
    for alarm in tx.state.alarms:
        if alarm not in active:
            tx.emit("alarm_cleared", code=alarm.code, subject=alarm.subject)
    for alarm, details in current:
        if alarm not in tx.state.alarms:
            tx.alarm(alarm.code, alarm.subject, **details)
    tx.set(alarms=tuple(active))


def _fault(tx: Transaction) -> str | None:
    """The first station fault that forbids the enable, running tightening or not."""
    state = tx.state
    health = state.health
    if health.camera_moved:
        return "camera_moved"
    if health.camera_unchecked is not None:
        return "camera_unchecked"
    if health.cannot_judge is not None:
        return "cannot_judge"
    if health.detector_fault is not None:
        return "detector_fault"
    if not frame_is_fresh(state, tx.index):
        return "frame_stale"
    if image_is_frozen(state, tx.index):
        return "image_frozen"
    if not state.tool.visible:
        return "tool_not_visible"
    return None


def decide_enable(tx: Transaction) -> tuple[bool, str]:
    """(enable, reason); the reason names the first rule that decided."""
    state, target = tx.state, tx.target()
    health, tool, control = state.health, state.tool, state.control
    if not health.link_ok:
        return False, "link_lost"
    if tx.unit is None:
        return False, "no_unit"
    if target is None:
        return False, f"{tx.phase}_step"
    fault = _fault(tx)
    if fault is not None:
        return False, fault
    if control.running_for == target.ref:
        if tool.zone != target.ref.zone:
            return False, "tip_left_during_run"
        return True, "tightening_running"
    if tool.arrived_zone != target.ref.zone:
        return False, "dwelling" if tool.zone == target.ref.zone else "tip_not_at_target"
    hold_off = control.hold_off_until_t_s
    if hold_off is not None and exceeded(elapsed_ms(tx.now_t_s, hold_off), 0.0):
        return False, control.hold_off_reason
    if control.running:
        return False, control.run_cut or "wait_tool_stop"
    if not control.enabled and not tool.seen:
        return False, "tip_not_seen"  # the grace keeps an enable, it never grants one
    return True, "tip_at_target"


def _cut_run(tx: Transaction, reason: str) -> None:
    """The enable dropped during a granted run: the grant ends, the tool must stop first."""
    target = tx.target()
    tx.set_control(running_for=None, run_cut=reason)
    if reason == "tip_left_during_run" and target is not None:
        where = tx.index.label(target.ref.zone)
        tx.alarm(
            "tip_left_during_run",
            subject=target.ref.zone,
            message=f"the tip left {where} while the tool ran; enable dropped",
        )


def update_enable(tx: Transaction) -> None:
    enabled, reason = decide_enable(tx)
    control, target = tx.state.control, tx.target()
    if not enabled and target is not None and control.running_for == target.ref:
        _cut_run(tx, reason)
        control = tx.state.control
    if enabled and target is not None and control.enabled_for != target.ref:
        tx.set_control(enabled_for=target.ref, attempt_started_t_s=tx.now_t_s)
    if enabled != control.enabled:
        where = {"step": target.ref.step, "zone": target.ref.zone} if target is not None else {}
        if enabled and target is not None:
            attempt = target.attempts + 1
            tx.emit("tool_enabled", **where, position=target.number, attempt=attempt, reason=reason)
        else:
            tx.emit("tool_inhibited", **where, reason=reason)
    tx.set_control(enabled=enabled, reason=reason)


def settle(tx: Transaction) -> None:
    complete_pick_if_due(tx)
    check_run_time(tx)
    update_alarms(tx)
    update_enable(tx)
