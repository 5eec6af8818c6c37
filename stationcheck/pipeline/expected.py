"""Decisions in one comparable vocabulary: read from an expected-decisions file, or derived
from a run's events.

Expected-decisions file (JSON lines, one decision each, in frame order), keys ``frame``,
``t_s``, ``kind``, ``serial`` plus, by kind:

================  =======================================================================
kind              fields
================  =======================================================================
enable            ``on``, ``zone`` (the position enabled, or the one that was enabled)
position_result   ``zone``, ``attempt``, ``ok`` (``torque_nm``, ``angle_deg`` informative)
rework_mark       ``zone``: the position used up its attempts and is left for rework
step_done         ``step`` (a pick or fasten step), ``failed`` (fasten: zones left NOK)
check_result      ``step``, ``passed``
unit_result       ``result`` (``OK``, ``NOK`` = left for rework, ``not_released``),
                  ``failed`` (zones)
alarm             ``alarm`` (code), ``zone`` (optional: the zone it is about)
================  =======================================================================
"""

from __future__ import annotations

from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from stationcheck.core import event_kinds as ev
from stationcheck.core.alarms import ALARMS
from stationcheck.core.events import RESULT_NOK, RESULT_OK
from stationcheck.core.observations import PositionRef
from stationcheck.errors import InputFileError
from stationcheck.pipeline.decision_trace import FramedEvent
from stationcheck.pipeline.json_lines import read_json_lines

DECISION_KINDS = (
    "enable",
    "position_result",
    "rework_mark",
    "step_done",
    "check_result",
    "unit_result",
    "alarm",
)
NOT_RELEASED = "not_released"


@dataclass(frozen=True)
class Decision:
    frame: int
    kind: str
    serial: str | None
    data: Mapping[str, Any] = field(default_factory=dict)
    pass_no: int = 0  # 1 for a unit's first pass, 2 for its first rework pass; 0 no unit


def read_expected(path: Path | str) -> list[Decision]:
    decisions: list[Decision] = []
    for where, raw in read_json_lines(Path(path), "expected-decisions"):
        frame, kind, serial = raw.get("frame"), raw.get("kind"), raw.get("serial")
        if not isinstance(frame, int) or isinstance(frame, bool) or frame < 0:
            raise InputFileError(f"{where}: frame must be a whole number >= 0, got {frame!r}")
        if kind not in DECISION_KINDS:
            raise InputFileError(
                f"{where}: kind must be one of {list(DECISION_KINDS)}, got {kind!r}"
            )
        if serial is not None and not isinstance(serial, str):
            raise InputFileError(f"{where}: serial must be text or null, got {serial!r}")
        data = {k: v for k, v in raw.items() if k not in ("frame", "t_s", "kind", "serial")}
        decisions.append(Decision(frame, kind, serial, data))
    return number_passes(decisions)


def number_passes(decisions: Iterable[Decision]) -> list[Decision]:
    """A unit's decisions up to its unit_result are pass 1; later ones of the same serial
    pass 2, and so on."""
    passes: dict[str, int] = {}
    closed: set[str] = set()
    out: list[Decision] = []
    for decision in decisions:
        serial = decision.serial
        if serial is None:
            out.append(decision)
            continue
        if serial not in passes or serial in closed:
            passes[serial] = passes.get(serial, 0) + 1
            closed.discard(serial)
        out.append(Decision(decision.frame, decision.kind, serial, decision.data, passes[serial]))
        if decision.kind == "unit_result":
            closed.add(serial)
    return out


def _zones(refs: Iterable[PositionRef]) -> list[str]:
    return [ref.zone for ref in refs]


def unit_result_word(result: str, failed_zones: list[str]) -> str:
    """OK; NOK when positions are left for rework; anything else is not released."""
    if result == RESULT_OK:
        return "OK"
    if result == RESULT_NOK and failed_zones:
        return "NOK"
    return NOT_RELEASED


def _is_alarm(code: str) -> bool:
    info = ALARMS.get(code)
    return info is not None and info.severity == "alarm"


def decisions_from_events(framed: Iterable[FramedEvent], end_frame: int) -> list[Decision]:
    """The run's events as decisions; a unit still open at the end is ``not_released``.
    Warnings (alarms of severity warning) are left out: they change nothing."""
    out: list[Decision] = []
    enabled_zone: str | None = None
    open_units: dict[str, bool] = {}
    for item in framed:
        event, frame = item.event, item.frame_index
        serial = event.serial
        match event:
            case ev.ToolEnabled():
                enabled_zone = event.zone
                out.append(Decision(frame, "enable", serial, {"on": True, "zone": enabled_zone}))
            case ev.ToolInhibited():
                out.append(
                    Decision(
                        frame,
                        "enable",
                        serial,
                        {"on": False, "zone": enabled_zone, "reason": event.reason},
                    )
                )
                enabled_zone = None
            case ev.TighteningResult():
                out.append(
                    Decision(
                        frame,
                        "position_result",
                        serial,
                        {
                            "zone": event.zone,
                            "attempt": event.attempt,
                            "ok": event.result == RESULT_OK,
                        },
                    )
                )
            case ev.PositionFailed():
                out.append(Decision(frame, "rework_mark", serial, {"zone": event.zone}))
            case ev.StepCompleted() if event.step_kind == "check":
                out.append(
                    Decision(
                        frame,
                        "check_result",
                        serial,
                        {"step": event.step, "passed": event.result == RESULT_OK},
                    )
                )
            case ev.StepCompleted():
                out.append(
                    Decision(
                        frame,
                        "step_done",
                        serial,
                        {"step": event.step, "failed": _zones(event.failed_positions)},
                    )
                )
            case ev.UnitStarted():
                assert serial is not None
                open_units[serial] = event.rework
            case ev.UnitEnded():
                if serial is not None:
                    open_units.pop(serial, None)
                failed = _zones(event.failed_positions)
                out.append(
                    Decision(
                        frame,
                        "unit_result",
                        serial,
                        {
                            "result": unit_result_word(event.result, failed),
                            "failed": failed,
                            "rework": event.rework,
                            "ended_by": event.ended_by,
                        },
                    )
                )
            case ev.AlarmRaised() if _is_alarm(event.code):
                subject = event.subject or None
                out.append(Decision(frame, "alarm", serial, {"alarm": event.code, "zone": subject}))
    for serial, rework in open_units.items():
        out.append(
            Decision(
                end_frame,
                "unit_result",
                serial,
                {
                    "result": NOT_RELEASED,
                    "failed": [],
                    "rework": rework,
                    "ended_by": "open_at_end",
                },
            )
        )
    return number_passes(out)
