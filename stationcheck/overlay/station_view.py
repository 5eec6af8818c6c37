"""What the station shows a person at one frame: the outputs plus what happened lately (done and
failed positions, the last tightening, the last unit's result, alarms in words).

The annotated video draws it; an operator screen can send it as it is. Meanings follow
IEC 60073 (normal, abnormal, fault, operator action, neutral); every drawing of a meaning
also carries words or a symbol, never colour alone.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Literal

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import RESULT_OK, Event
from stationcheck.core.outputs import Output
from stationcheck.core.plan import FastenStep, StationPlan
from stationcheck.core.result_words import unit_word

Meaning = Literal["normal", "abnormal", "fault", "action", "neutral"]

# code -> (meaning, words for the operator)
ALARM_WORDS: dict[str, tuple[Meaning, str]] = {
    "camera_moved": ("fault", "Camera moved: call setup"),
    "camera_unchecked": ("fault", "Too dark or noisy to check the camera"),
    "cannot_judge": ("fault", "Cannot judge: picture too poor"),
    "detector_fault": ("fault", "Tool detection failed"),
    "frame_stale": ("fault", "No fresh camera image"),
    "link_lost": ("fault", "PLC link lost"),
    "tool_lost": ("abnormal", "Tool not seen: bring it back into view"),
    "wrong_position": ("abnormal", "Wrong position"),
    "wrong_bin": ("abnormal", "Wrong bin"),
    "image_frozen": ("fault", "Camera picture frozen"),
    "run_too_long": ("fault", "Tool ran too long: enable dropped"),
}
FAULT_REASONS = {code for code, (meaning, _) in ALARM_WORDS.items() if meaning == "fault"}
REASON_WORDS = {
    "no_unit": "no unit open",
    "link_lost": "PLC link lost",
    "camera_moved": "camera moved",
    "camera_unchecked": "picture too dark or noisy to check the camera",
    "cannot_judge": "picture too poor to judge",
    "detector_fault": "tool detection failed",
    "frame_stale": "no fresh camera image",
    "tool_not_visible": "tool not seen",
    "tip_not_at_target": "tip not at the next position",
    "dwelling": "hold the tool still at the position",
    "reset_hold": "hold the tool still at the position",
    "new_attempt_dwell": "hold the tool still at the position",
    "pick_step": "take the part first",
    "check_step": "fastening done; check step",
    "confirm_step": "acknowledge first",
    "tip_at_target": "tip at the target",
    "tightening_running": "tightening running",
    "image_frozen": "camera picture frozen",
    "run_too_long": "the tool ran too long",
    "tip_left_during_run": "the tip left the position while the tool ran",
    "wait_tool_stop": "let go of the trigger: the tool must stop first",
    "tip_not_seen": "hold the tool still at the position",
}
GUIDANCE_MEANING: dict[str, Meaning] = {
    "wait_for_unit": "neutral",
    "unit_finished": "neutral",
    "fasten": "action",
    "rework": "action",
    "take_part": "action",
    "check": "action",
    "acknowledge": "action",
    "wrong_position": "abnormal",
    "wrong_bin": "abnormal",
    "show_tool": "abnormal",
    "inhibited": "fault",
}


@dataclass(frozen=True)
class AlarmShown:
    code: str
    meaning: Meaning
    words: str


@dataclass(frozen=True)
class TighteningShown:
    zone: str
    position: int
    attempt: int
    ok: bool
    torque_nm: float | None
    angle_deg: float | None
    t_s: float
    torque_limits_nm: tuple[float | None, float | None] = (None, None)
    angle_limits_deg: tuple[float | None, float | None] = (None, None)
    max_attempts: int | None = None


@dataclass(frozen=True)
class UnitShown:
    serial: str
    rework: bool
    result: str  # OK, NOK or aborted (core.result_words)
    released: bool
    failed_zones: tuple[str, ...]
    t_s: float


@dataclass(frozen=True)
class StationView:
    frame_index: int
    t_s: float
    output: Output
    tip_px: tuple[float, float] | None = None
    rear_px: tuple[float, float] | None = None
    tip_seen: bool = False
    done_zones: tuple[str, ...] = ()
    failed_zones: tuple[str, ...] = ()
    wrong_zone: str | None = None  # fastener zone the tip dwells at instead of the target
    wrong_bin: str | None = None
    check_verdict: str | None = None
    last_tightening: TighteningShown | None = None
    last_unit: UnitShown | None = None
    alarms: tuple[AlarmShown, ...] = ()

    @property
    def enable_meaning(self) -> Meaning:
        if self.output.tool_enabled:
            return "normal"
        return "fault" if self.output.enable_reason in FAULT_REASONS else "neutral"

    @property
    def enable_reason_words(self) -> str:
        reason = self.output.enable_reason
        return REASON_WORDS.get(reason, reason.replace("_", " "))

    @property
    def guidance_meaning(self) -> Meaning:
        if self.output.guidance.kind == "unit_finished" and self.last_unit is not None:
            return "normal" if self.last_unit.released else "fault"
        return GUIDANCE_MEANING.get(self.output.guidance.kind, "neutral")


@dataclass
class StationViewBuilder:
    """Folds each frame's events into what the view shows; call :meth:`view` once per frame."""

    plan: StationPlan
    done: list[str] = field(default_factory=list)
    check_verdict: str | None = None
    last_tightening: TighteningShown | None = None
    last_unit: UnitShown | None = None
    _wrong: dict[str, str] = field(default_factory=dict)

    def position_order(self) -> dict[str, int]:
        """Fastener zone -> its number in the tightening order."""
        order: dict[str, int] = {}
        for step in self.plan.steps:
            if isinstance(step, FastenStep):
                for number, zone in enumerate(step.zones, start=1):
                    order.setdefault(zone, number)
        return order

    def fold(self, events: Iterable[Event]) -> None:
        for event in events:
            match event:
                case ev.UnitStarted():
                    in_pass = {p.zone for p in event.positions}
                    # a rework pass holds only the positions to redo; the others were done before
                    self.done = [z for z in self.position_order() if z not in in_pass]
                    self.check_verdict = None
                    self.last_tightening = None
                    self._wrong = {}
                case ev.PositionCompleted():
                    self.done.append(event.zone)
                case ev.TighteningResult():
                    self.last_tightening = TighteningShown(
                        zone=event.zone,
                        position=event.position,
                        attempt=event.attempt,
                        ok=event.result == RESULT_OK,
                        torque_nm=event.torque.value,
                        angle_deg=event.angle.value,
                        t_s=event.t_s,
                        torque_limits_nm=(event.torque.low, event.torque.high),
                        angle_limits_deg=(event.angle.low, event.angle.high),
                        max_attempts=event.max_attempts,
                    )
                case ev.CheckVerdict():
                    self.check_verdict = event.verdict
                case ev.UnitEnded() if event.serial is not None:
                    failed = tuple(r.zone for r in event.failed_positions)
                    self.last_unit = UnitShown(
                        event.serial,
                        event.rework,
                        unit_word(event.result),
                        event.released,
                        failed,
                        event.t_s,
                    )
                case ev.AlarmRaised() if event.code in ("wrong_position", "wrong_bin"):
                    self._wrong[event.code] = event.subject

    def view(
        self,
        output: Output,
        *,
        frame_index: int,
        t_s: float,
        tip_px: tuple[float, float] | None = None,
        rear_px: tuple[float, float] | None = None,
        tip_seen: bool = False,
    ) -> StationView:
        active = set(output.alarms)
        alarms = tuple(
            AlarmShown(code, *ALARM_WORDS[code]) for code in sorted(active) if code in ALARM_WORDS
        )
        return StationView(
            frame_index=frame_index,
            t_s=t_s,
            output=output,
            tip_px=tip_px,
            rear_px=rear_px,
            tip_seen=tip_seen,
            done_zones=tuple(self.done),
            failed_zones=tuple(ref.zone for ref in output.failed_positions),
            wrong_zone=self._wrong.get("wrong_position") if "wrong_position" in active else None,
            wrong_bin=self._wrong.get("wrong_bin") if "wrong_bin" in active else None,
            check_verdict=self.check_verdict,
            last_tightening=self.last_tightening,
            last_unit=self.last_unit,
            alarms=alarms,
        )
