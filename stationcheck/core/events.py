"""Events: the append-only truth of what happened to units, steps, the tool and alarms.

A step log stores these as they come; units, steps and alarms are views over them, and
:func:`stationcheck.core.progress.rebuild_unit` folds them back into an open unit after a restart.
Every ``data`` mapping is canonical JSON (lists, not tuples), so an event survives a JSON round
trip unchanged.
"""

from __future__ import annotations

import json
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

from stationcheck.core.validation import require_finite, require_one_of
from stationcheck.errors import InputFileError

# kind -> what it records (the data keys are documented in DEVELOPERS.md)
EVENT_KINDS: dict[str, str] = {
    "unit_started": "a unit (or its rework pass) opened; lists the steps and positions to do",
    "step_started": "a step became the current one",
    "step_completed": "a step finished, with its result and start/end times",
    "tool_enabled": "the enable output went on, for which position",
    "tool_inhibited": "the enable output went off, and why",
    "run_started": "the tool reported running while enabled for a position",
    "run_stopped": "the tool reported it stopped running",
    "tightening_result": "a counted tightening attempt at a position, with values and limits",
    "position_completed": "a fastener position got its OK result",
    "position_failed": "a fastener position used up its attempts and needs rework",
    "check_verdict": "the presence judgement of the current check step changed",
    "unit_ended": "the unit closed: result, failed positions and checks, times, how it ended",
    "alarm_raised": "an alarm or warning; conditions also get alarm_cleared",
    "alarm_cleared": "a condition alarm stopped",
    "station_reset": "an explicit reset, with its reason",
    "picture_quality": "the camera picture's figures and whether it can be judged",
}

# Result vocabulary of the OPC UA joining result model where it fits.
RESULT_OK = "OK"
RESULT_NOK = "NotOK"
RESULT_UNDECIDED = "NotDecidable"


def canonical_json(data: Mapping[str, Any]) -> dict[str, Any]:
    """The mapping as JSON would give it back; raises ValueError if it is not JSON-ready."""
    try:
        text = json.dumps(dict(data), allow_nan=False, sort_keys=True)
    except (TypeError, ValueError) as exc:
        raise ValueError(f"Event.data must be JSON-serialisable, got {data!r}: {exc}") from exc
    result: dict[str, Any] = json.loads(text)
    return result


@dataclass(frozen=True)
class Event:
    """One thing that happened; ``serial`` is None for station-level events (e.g. link lost)."""

    t_s: float
    kind: str
    serial: str | None
    data: Mapping[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        require_finite("Event", "t_s", self.t_s)
        require_one_of("Event", "kind", self.kind, EVENT_KINDS)
        if self.serial is not None and (not isinstance(self.serial, str) or not self.serial):
            raise ValueError(
                f"Event.serial must be a non-empty string or None, got {self.serial!r}"
            )
        object.__setattr__(self, "data", canonical_json(self.data))

    def to_dict(self) -> dict[str, Any]:
        return {"t_s": self.t_s, "kind": self.kind, "serial": self.serial, "data": dict(self.data)}

    @classmethod
    def from_dict(cls, raw: Mapping[str, Any]) -> Event:
        expected = {"t_s", "kind", "serial", "data"}
        if set(raw) != expected:
            raise InputFileError(f"event keys must be {sorted(expected)}, got {sorted(raw)}")
        try:
            return cls(t_s=raw["t_s"], kind=raw["kind"], serial=raw["serial"], data=raw["data"])
        except (TypeError, ValueError) as exc:
            raise InputFileError(f"event is malformed: {exc}") from exc
