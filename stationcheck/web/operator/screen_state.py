"""The operator screen's content at one frame, as plain JSON-ready data.

Everything the page writes comes from here, already in words, with its IEC 60073 meaning
(``normal``, ``abnormal``, ``fault``, ``action``, ``neutral``) beside it; the page only lays it
out. ``steady`` is what changes with the station's state; ``tick`` is what changes every frame
(tip, frame number), so the page redraws its text only when something it says changed.
"""

from __future__ import annotations

from collections import deque
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any, Literal

from stationcheck.core import event_kinds as ev
from stationcheck.core.alarms import ALARMS
from stationcheck.core.events import Event
from stationcheck.core.observations import PictureState
from stationcheck.core.plan import FastenStep
from stationcheck.overlay.scene import fastener_state
from stationcheck.overlay.station_view import Meaning, StationView
from stationcheck.web.operator.wording import Wording, condition_alarm, event_alarm

EVENT_ALARM_SHOWN_S = 8.0
# the screen's own words for an enable reason, where the station view's differ
SCREEN_REASON_WORDS = {"no_unit": "no unit on the station"}
# the tool once the station program has stopped: off, whatever the last frame said
ENDED_TOOL = {
    "enabled": False,
    "meaning": "neutral",
    "words": "TOOL OFF",
    "reason": "the station program is not running",
}
# step kind (core.step_kinds.STEP_KINDS) -> what the screen shows for it beside the instruction:
# the step's fastener positions with their states, the ACKNOWLEDGE button, or nothing more
StepPanel = Literal["positions", "acknowledge", "instruction_only"]
STEP_PANEL: dict[str, StepPanel] = {
    "fasten": "positions",
    "pick": "instruction_only",
    "check": "instruction_only",
    "confirm": "acknowledge",
}
POSITION_MEANING: dict[str, tuple[Meaning, str]] = {
    "enabled": ("normal", "ON"),
    "retry": ("abnormal", "AGAIN"),
    "target": ("action", "NEXT"),
    "wrong": ("abnormal", "WRONG"),
    "failed": ("fault", "NOK"),
    "done": ("normal", "OK"),
    "pending": ("neutral", "open"),
}


@dataclass(frozen=True)
class RecentAlarm:
    code: str
    t_s: float


class RecentAlarms:
    """One-off alarms (no ``alarm_cleared`` follows them), kept for a few seconds."""

    def __init__(self, shown_s: float = EVENT_ALARM_SHOWN_S) -> None:
        self.shown_s = shown_s
        self.items: deque[RecentAlarm] = deque(maxlen=8)

    def fold(self, events: Iterable[Event]) -> None:
        for event in events:
            if not isinstance(event, ev.AlarmRaised):
                continue
            info = ALARMS.get(event.code)
            if info is not None and not info.condition:
                self.items.append(RecentAlarm(event.code, event.t_s))

    def active(self, now_t_s: float) -> list[str]:
        return [a.code for a in self.items if 0.0 <= now_t_s - a.t_s <= self.shown_s]


def _alarm(code: str, meaning: Meaning, words: str, todo: str) -> dict[str, str]:
    return {"code": code, "meaning": meaning, "words": words, "todo": todo}


def alarms_shown(view: StationView, recent: list[str]) -> list[dict[str, str]]:
    """Conditions first (faults before abnormal), then recent one-off alarms; no repeats."""
    shown = [_alarm(code, *condition_alarm(code)) for code in view.output.alarms]
    shown.sort(key=lambda a: a["meaning"] != "fault")
    shown.extend(_alarm(code, *event_alarm(code)) for code in dict.fromkeys(recent))
    return shown


def _tool(view: StationView) -> dict[str, Any]:
    on = view.output.tool_enabled
    reason = SCREEN_REASON_WORDS.get(view.output.enable_reason, view.enable_reason_words)
    return {
        "enabled": on,
        "meaning": view.enable_meaning,
        "words": "TOOL ON" if on else "TOOL OFF",
        "reason": reason,
    }


def _positions(view: StationView, wording: Wording) -> tuple[list[dict[str, Any]], int, int]:
    """The positions of the current (or, between units, the first) fasten step, each with
    its state; and how many are done out of how many."""
    out = view.output
    steps = [
        s
        for s in wording.plan.steps
        if STEP_PANEL.get(s.kind) == "positions" and isinstance(s, FastenStep)
    ]
    current = next((s for s in steps if s.id == out.step_id), steps[0] if steps else None)
    if current is None or out.serial is None:
        return [], 0, 0
    rows = []
    last = view.last_tightening
    for zone in current.zones:
        state = fastener_state(view, zone)
        if (
            state in ("enabled", "target")
            and last is not None
            and not last.ok
            and last.zone == zone
        ):
            state = "retry"  # its last attempt was NOK: never a tick beside it
        meaning, word = POSITION_MEANING[state]
        rows.append(
            {
                "zone": zone,
                "name": wording.position_names.get(zone, zone),
                "label": wording.label(zone),
                "state": state,
                "meaning": meaning,
                "word": word,
            }
        )
    done = sum(1 for zone in current.zones if zone in view.done_zones)
    return rows, done, len(current.zones)


def _last_result(view: StationView, wording: Wording) -> dict[str, Any] | None:
    result = view.last_tightening
    if result is None:
        return None
    return {
        "position": wording.position_names.get(result.zone, result.zone),
        "label": wording.label(result.zone),
        "ok": result.ok,
        "word": "OK" if result.ok else "NOK",
        "meaning": "normal" if result.ok else "fault",
        "torque_nm": result.torque_nm,
        "angle_deg": result.angle_deg,
        "attempt": result.attempt,
    }


def _unit(view: StationView, done: int, total: int) -> dict[str, Any] | None:
    out = view.output
    if out.serial is None:
        return None
    running = out.unit_status == "running"
    last = view.last_unit
    result = None
    if not running and last is not None and last.serial == out.serial:
        result = {
            "word": last.result,  # OK, NOK or aborted (core.result_words)
            "meaning": "normal" if last.released else "fault",
        }
    return {
        "serial": out.serial,
        "rework": out.rework,
        "running": running,
        "step": f"Step {out.step_number} of {out.step_count}" if out.step_count else "",
        "done": done,
        "total": total,
        "result": result,
    }


def _ack(view: StationView, wording: Wording, acks_allowed: bool) -> dict[str, Any]:
    step = wording.steps.get(view.output.step_id or "")
    needed = (
        view.output.guidance.kind == "acknowledge"
        and step is not None
        and STEP_PANEL.get(step.kind) == "acknowledge"
    )
    return {
        "needed": needed,
        "allowed": needed and acks_allowed,
        "serial": view.output.serial,
        "step": view.output.step_id,
        "why_not": "" if acks_allowed else "replay: acknowledges come from the recording",
    }


def steady_state(
    view: StationView,
    wording: Wording,
    *,
    mode: str,
    recent: list[str],
    acks_allowed: bool,
    ended: str | None = None,
) -> dict[str, Any]:
    """``ended``: why the run ended (it did when given); the tool then shows off and no
    acknowledge can be pressed."""
    instruction = wording.instruction(view, mode)
    positions, done, total = _positions(view, wording)
    state: dict[str, Any] = {
        "mode": mode,
        "station": wording.plan.station,
        "instruction": {
            "kind": instruction.kind,
            "text": instruction.text,
            "detail": instruction.detail,
            "meaning": instruction.meaning,
        },
        "tool": _tool(view),
        "unit": _unit(view, done, total),
        "positions": positions,
        "last_result": _last_result(view, wording),
        "alarms": alarms_shown(view, recent),
        "ack": _ack(view, wording, acks_allowed),
    }
    if ended is not None:
        state["ended"] = ended
        state["tool"] = dict(ENDED_TOOL)
        state["ack"]["allowed"] = False
    return state


def picture_state(obs: PictureState | None) -> dict[str, Any] | None:
    """The camera picture's figures and whether the image checks can work with it."""
    if obs is None:
        return None
    if not obs.camera_checkable:
        meaning: Meaning = "fault"
        words = "Picture too dark or too noisy to check the camera"
    elif not obs.judgeable:
        meaning, words = "fault", "Cannot judge bins and checks: picture too poor"
    else:
        meaning, words = "normal", "Picture good enough to judge"
    return {
        "meaning": meaning,
        "words": words,
        "reason": obs.reason,
        "figures": [
            ["brightness", f"{obs.brightness:.0f}"],
            ["contrast", f"{obs.contrast:.0f}"],
            ["noise", f"{obs.noise_sigma:.1f}"],
            ["sharpness", f"{obs.sharpness:.0f}"],
            ["blockiness", f"{obs.blockiness:.2f}"],
        ],
    }


def tick_state(view: StationView, seq: int) -> dict[str, Any]:
    return {
        "seq": seq,
        "frame": view.frame_index,
        "t_s": round(view.t_s, 3),
        "tip_seen": view.tip_seen,
    }
