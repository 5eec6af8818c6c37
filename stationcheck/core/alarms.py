"""Every alarm the sequencer raises, with a stable number (e.g. for a PLC alarm register).

Conditions last while their cause lasts and get an ``alarm_cleared`` event when it ends; one-off
alarms are single ``alarm_raised`` events. Warnings record something odd that changed nothing.
Never renumber: add new codes at the end.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

Severity = Literal["alarm", "warning"]


@dataclass(frozen=True)
class AlarmInfo:
    number: int
    severity: Severity
    condition: bool  # cleared by an event when the cause ends
    meaning: str


ALARMS: dict[str, AlarmInfo] = {
    "link_lost": AlarmInfo(1, "alarm", True, "the PLC link is down"),
    "camera_moved": AlarmInfo(2, "alarm", True, "the camera moved away from its reference view"),
    "detector_fault": AlarmInfo(3, "alarm", True, "the keypoint detector failed on a frame"),
    "frame_stale": AlarmInfo(4, "alarm", True, "no fresh camera frame"),
    "tool_lost": AlarmInfo(5, "alarm", True, "the tool is out of view during fastening"),
    "wrong_position": AlarmInfo(6, "alarm", True, "the tip dwells at a fastener that is not next"),
    "wrong_bin": AlarmInfo(7, "alarm", True, "activity in a bin that is not the step's"),
    "result_without_enable": AlarmInfo(8, "alarm", False, "a result came without enable"),
    "ran_while_inhibited": AlarmInfo(9, "alarm", False, "the tool ran while not enabled"),
    "unit_interrupted": AlarmInfo(10, "alarm", False, "a new serial came while a unit was open"),
    "rework_nothing_to_do": AlarmInfo(11, "alarm", False, "rework asked with no known position"),
    "unknown_rework_position": AlarmInfo(12, "warning", False, "a rework position is unknown"),
    "unit_already_open": AlarmInfo(13, "warning", False, "the open unit's serial came again"),
    "duplicate_result": AlarmInfo(14, "warning", False, "a result was reported twice"),
    "result_outside_limits": AlarmInfo(15, "warning", False, "OK result outside the limits"),
    "run_without_result": AlarmInfo(16, "warning", False, "a tightening run gave no result"),
    "check_failed": AlarmInfo(17, "alarm", False, "a check was acknowledged without passing"),
    "cannot_judge": AlarmInfo(50, "alarm", True, "the picture is too poor to judge bins/checks"),
    "camera_unchecked": AlarmInfo(51, "alarm", True, "too dark or noisy to check the camera"),
}
