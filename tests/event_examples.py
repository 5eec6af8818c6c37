"""Typed events for tests: one example of every kind with every field set, one with only what
the kind requires, and short factories for hand-made logs (invented values)."""

from __future__ import annotations

from typing import Any

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import EVENT_CLASSES, Event
from stationcheck.core.observations import PositionRef

S2 = PositionRef("fasten", "s2")
TORQUE = ev.Measured(5.1, 4.5, 5.5, "N·m")
ANGLE = ev.Measured(31.0, 15.0, 45.0, "deg")


def unit_started(t_s: float, serial: str, rework: bool = False,
                 positions: tuple[ev.PlannedPosition, ...] = (), **more: Any) -> ev.UnitStarted:
    steps = (ev.PlannedStep("fasten", "fasten"),) if positions else ()
    return ev.UnitStarted(t_s, serial, rework=rework, steps=steps, positions=positions,
                          rework_positions=(), **more)


def tightening(t_s: float, serial: str, zone: str = "z1", result: str = "OK",
               **more: Any) -> ev.TighteningResult:
    fields: dict[str, Any] = {
        "step": "fasten", "zone": zone, "position": 1, "attempt": 1, "max_attempts": 3,
        "rework": False, "result": result, "torque": TORQUE, "angle": ANGLE,
        "within_limits": True, "sequence": None, "started_t_s": None, "ended_t_s": t_s}
    fields.update(more)
    return ev.TighteningResult(t_s, serial, **fields)


def unit_ended(t_s: float, serial: str, result: str = "OK", started_t_s: float = 0.0,
               **more: Any) -> ev.UnitEnded:
    fields: dict[str, Any] = {
        "result": result, "released": result == "OK", "ended_by": "completed", "reason": "",
        "rework": False, "failed_positions": (), "unfinished_positions": (),
        "started_t_s": started_t_s, "cycle_time_s": t_s - started_t_s, "alarms": ()}
    fields.update(more)
    return ev.UnitEnded(t_s, serial, **fields)


def alarm(t_s: float, serial: str | None, code: str = "tool_lost", **more: Any) -> ev.AlarmRaised:
    fields: dict[str, Any] = {"code": code, "number": 3, "severity": "alarm", "subject": "",
                              "message": "the tool is out of view"}
    fields.update(more)
    return ev.AlarmRaised(t_s, serial, **fields)


FULL: dict[str, Event] = {e.kind: e for e in [
    unit_started(1.0, "PC-1", positions=(ev.PlannedPosition("fasten", "s2", 2),),
                 station="demo pump cover", demo_data=True, model_sha256="ab" * 32),
    ev.StepStarted(1.5, "PC-1", step="fasten", step_kind="fasten", index=0, count=2),
    ev.StepCompleted(9.0, "PC-1", step="pin", step_kind="check", index=1, result="NotOK",
                     ended_by="check_failed", started_t_s=8.0, failed_positions=(S2,),
                     zone="chk", active_ms=310.5, expect="present", verdict="absent",
                     margin=-0.25, evidence_path="evidence/pin.png"),
    ev.ToolEnabled(2.0, "PC-1", step="fasten", zone="s2", position=2, attempt=1,
                   reason="tip_at_target"),
    ev.ToolInhibited(3.0, "PC-1", reason="stopped_on_error", step="fasten", zone="s2",
                     was_enabled=True, error="camera unplugged"),
    ev.RunStarted(2.1, "PC-1", step="fasten", zone="s2", position=2),
    ev.RunStopped(2.9, "PC-1", awaiting_result=True),
    tightening(3.0, "PC-1", zone="s2", result="NotOK", sequence=41, started_t_s=2.0,
               run_cut="tip_left_during_run", evidence_path="evidence/s2.png",
               torque=ev.Measured(None, None, 5.5, "N·m")),
    ev.PositionCompleted(3.0, "PC-1", step="fasten", zone="s2", position=2, attempts=2,
                         rework=True),
    ev.PositionFailed(3.0, "PC-1", step="fasten", zone="s2", position=2, attempts=3,
                      rework=False),
    ev.CheckVerdict(8.5, "PC-1", step="pin", zone="chk", verdict="absent", expect="present",
                    margin=-0.25),
    unit_ended(9.0, "PC-1", result="NotOK", started_t_s=1.0, failed_positions=(S2,),
               unfinished_positions=(PositionRef("fasten", "s3"),), alarms=("check_failed",),
               failed_checks=(ev.CheckRef("pin", "chk"),), reason="check pin failed"),
    alarm(4.0, None, code="result_without_enable", subject="41", reason="not_enabled",
          result="OK", torque_nm=5.0, angle_deg=30.0, sequence=41, expected="s1", zone="s2",
          step="pin", expect="present", verdict="absent"),
    ev.AlarmCleared(5.0, None, code="tool_lost", subject=""),
    ev.StationReset(6.0, None, reason="jammed tool"),
    ev.PictureQuality(7.0, "PC-1", judgeable=False, camera_checkable=True, reason="too dark",
                      brightness=40.0, contrast=12.5, noise_sigma=1.5, sharpness=80.0,
                      blockiness=0.1),
]}

MINIMAL: dict[str, Event] = {e.kind: e for e in [
    unit_started(1.0, "PC-1"),
    ev.StepStarted(1.5, "PC-1", step="fasten", step_kind="fasten", index=0, count=1),
    ev.StepCompleted(9.0, "PC-1", step="fasten", step_kind="fasten", index=0, result="OK",
                     ended_by="completed", started_t_s=None, failed_positions=()),
    FULL["tool_enabled"],
    ev.ToolInhibited(3.0, None, reason="link_lost"),
    FULL["run_started"],
    FULL["run_stopped"],
    tightening(3.0, "PC-1"),
    FULL["position_completed"],
    FULL["position_failed"],
    FULL["check_verdict"],
    unit_ended(9.0, "PC-1"),
    alarm(4.0, "PC-1"),
    FULL["alarm_cleared"],
    FULL["station_reset"],
    FULL["picture_quality"],
]}

assert set(FULL) == set(MINIMAL) == set(EVENT_CLASSES), "an example of every kind"
