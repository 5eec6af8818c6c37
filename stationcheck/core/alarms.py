"""Every alarm the station raises, with a stable number (the PLC's ``alarm_code`` and
``event_code`` registers carry it), its meaning and what to do about it.

Conditions last while their cause lasts and get an ``alarm_cleared`` event when it ends; one-off
alarms are single ``alarm_raised`` events. Warnings record something odd that changed nothing.
This table is the one list: ``stationcheck alarms`` and the README's alarm list are made from it.
Never renumber: add new codes at the end.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any, Literal

Severity = Literal["alarm", "warning"]


@dataclass(frozen=True)
class AlarmInfo:
    number: int
    severity: Severity
    condition: bool  # cleared by an event when the cause ends
    meaning: str
    action: str = ""  # what the maintenance or automation engineer does about it


ALARMS: dict[str, AlarmInfo] = {
    "link_lost": AlarmInfo(
        1,
        "alarm",
        True,
        "the PLC link is down",
        "check the network and the PLC; the tool stays off until it is back",
    ),
    "camera_moved": AlarmInfo(
        2,
        "alarm",
        True,
        "the camera moved away from its reference view",
        "put the camera back and check the view in the setup screen",
    ),
    "detector_fault": AlarmInfo(
        3,
        "alarm",
        True,
        "the keypoint detector failed on a frame",
        "look at the station log for the detector's error",
    ),
    "frame_stale": AlarmInfo(
        4, "alarm", True, "no fresh camera frame", "check the camera cable, power and light"
    ),
    "tool_lost": AlarmInfo(
        5,
        "alarm",
        True,
        "the tool is out of view during fastening",
        "the operator brings the tool back into view",
    ),
    "wrong_position": AlarmInfo(
        6,
        "alarm",
        True,
        "the tip dwells at a fastener that is not next",
        "the operator moves the tool to the target position",
    ),
    "wrong_bin": AlarmInfo(
        7,
        "alarm",
        True,
        "activity in a bin that is not the step's",
        "the operator takes the part from the step's bin",
    ),
    "result_without_enable": AlarmInfo(
        8,
        "alarm",
        False,
        "a result came without enable",
        "the result is not credited (result_status says why); check the tool wiring",
    ),
    "ran_while_inhibited": AlarmInfo(
        9,
        "alarm",
        False,
        "the tool ran while not enabled",
        "check that the PLC drops tool power when tool_enable is 0",
    ),
    "unit_interrupted": AlarmInfo(
        10,
        "alarm",
        False,
        "a new serial came while a unit was open",
        "the unfinished unit is not released; send it to rework",
    ),
    "rework_nothing_to_do": AlarmInfo(
        11,
        "alarm",
        False,
        "rework asked with no known position",
        "check the serial against the step log",
    ),
    "unknown_rework_position": AlarmInfo(
        12,
        "warning",
        False,
        "a rework position is unknown",
        "check the station config against the step log",
    ),
    "unit_already_open": AlarmInfo(
        13,
        "warning",
        False,
        "the open unit's serial came again",
        "none; check the PLC's unit handshake if it repeats",
    ),
    "duplicate_result": AlarmInfo(
        14,
        "warning",
        False,
        "a result was reported twice",
        "check that the PLC adds 1 to result_sequence per result",
    ),
    "result_outside_limits": AlarmInfo(
        15,
        "warning",
        False,
        "OK result outside the limits",
        "compare the tool's program with the configured limits",
    ),
    "run_without_result": AlarmInfo(
        16,
        "warning",
        False,
        "a tightening run gave no result",
        "check the tightening controller's result mapping",
    ),
    "check_failed": AlarmInfo(
        17,
        "alarm",
        False,
        "a check was acknowledged without passing",
        "the unit is not released; send it to rework",
    ),
    "run_too_long": AlarmInfo(
        18,
        "alarm",
        True,
        "a tightening ran past its run-time limit",
        "the position is marked NOK; check the tool and the joint, then rework",
    ),
    "image_frozen": AlarmInfo(
        19,
        "alarm",
        True,
        "the camera picture stopped changing",
        "check the camera, its cable and the capture device",
    ),
    "result_of_cut_run": AlarmInfo(
        20,
        "warning",
        False,
        "a result for a run whose enable was cut",
        "the result is flagged; inspect that position",
    ),
    "tip_left_during_run": AlarmInfo(
        21,
        "alarm",
        False,
        "the tool ran away from its position",
        "keep the tool on the fastener until the run ends",
    ),
    "plc_session_restart": AlarmInfo(
        30,
        "alarm",
        False,
        "the PLC's unit or result counter went backwards or to 0, or its liveness counter "
        "restarted: a new link session began and the echoes were re-synchronised",
        "check why the PLC restarted; a unit open at the time is presented again",
    ),
    "serial_refused": AlarmInfo(
        31,
        "alarm",
        False,
        "a unit's serial failed validation (control or non-ASCII characters, all 0xFFFF, empty "
        "or not matching plc.serial_pattern); the unit was refused",
        "check the serial source (scanner, PLC string mapping) and present the unit again",
    ),
    "plc_not_alive": AlarmInfo(
        32,
        "alarm",
        False,
        "the PLC's liveness counter did not change within plc.liveness_timeout_ms",
        "check that the PLC program adds 1 to plc_liveness every scan or poll",
    ),
    "result_without_sequence": AlarmInfo(
        33,
        "warning",
        False,
        "result_ok, torque or angle changed while result_sequence stayed the same",
        "check that the PLC adds 1 to result_sequence after writing each result",
    ),
    "cannot_judge": AlarmInfo(
        50,
        "alarm",
        True,
        "the picture is too poor to judge bins/checks",
        "check the light, the lens and the camera's compression setting",
    ),
    "camera_unchecked": AlarmInfo(
        51,
        "alarm",
        True,
        "too dark or noisy to check the camera",
        "check the light and the lens; the tool stays off meanwhile",
    ),
}


def alarm_rows() -> list[dict[str, Any]]:
    """The table as plain rows, by number (for ``stationcheck alarms --json`` and the README)."""
    rows = []
    for code, info in sorted(ALARMS.items(), key=lambda item: item[1].number):
        row = {"code": code, **asdict(info)}
        row["kind"] = "condition" if info.condition else "one-off"
        rows.append(row)
    return rows


def markdown_alarm_table() -> str:
    lines = [
        "| number | name | severity | kind | meaning | what to do |",
        "|---|---|---|---|---|---|",
    ]
    for row in alarm_rows():
        lines.append(
            f"| {row['number']} | {row['code']} | {row['severity']} | {row['kind']} | "
            f"{row['meaning']} | {row['action']} |"
        )
    return "\n".join(lines)
