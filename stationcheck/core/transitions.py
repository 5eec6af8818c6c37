"""The sequencer's transition table: (phase, input kind) -> handler, all in one place.

The phase is the kind of the open unit's current step, or ``idle`` when no unit is open. A
handler records what the input means; the phase after it follows from the unit's events (a
completed step moves to the next step's kind, a closed unit to ``idle``). After every input,
whatever its row, :func:`stationcheck.core.conditions.settle` runs: pick timer, condition alarms,
enable output. Every (phase, kind) pair has exactly one row; a test checks the table is total.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, get_args

from stationcheck.core import handlers as h
from stationcheck.core.observations import OBSERVATION_TYPES
from stationcheck.core.state import Phase
from stationcheck.core.transaction import Transaction

Handler = Callable[[Transaction, Any], None]

IDLE: tuple[Phase, ...] = ("idle",)
FASTEN: tuple[Phase, ...] = ("fasten",)
PICK: tuple[Phase, ...] = ("pick",)
CHECK: tuple[Phase, ...] = ("check",)
CONFIRM: tuple[Phase, ...] = ("confirm",)
OPEN: tuple[Phase, ...] = FASTEN + PICK + CHECK + CONFIRM
ANY: tuple[Phase, ...] = IDLE + OPEN
PHASES: tuple[Phase, ...] = get_args(Phase)


def all_but(*excluded: Phase) -> tuple[Phase, ...]:
    return tuple(phase for phase in ANY if phase not in excluded)


@dataclass(frozen=True)
class Row:
    phases: tuple[Phase, ...]
    kind: str
    handler: Handler
    leads_to: str


# fmt: off
TABLE: tuple[Row, ...] = (
    #   phases               input kind           handler                 next phase
    Row(IDLE,                "unit_started",      h.start_unit,           "first step"),
    Row(OPEN,                "unit_started",      h.replace_unit,         "first step of new unit"),
    Row(IDLE,                "abort",             h.ignore,               "idle"),
    Row(OPEN,                "abort",             h.abort_unit,           "idle"),
    Row(ANY,                 "reset",             h.reset_station,        "same"),
    Row(FASTEN,              "tightening_result", h.take_result,          "same/next step/idle"),
    Row(all_but("fasten"),   "tightening_result", h.reject_result,        "same"),
    Row(ANY,                 "tool_running",      h.note_running,         "same"),
    Row(ANY,                 "zone",              h.note_zone,            "same"),
    Row(ANY,                 "bin_activity",      h.note_bin_activity,    "same (pick timer)"),
    Row(CHECK,               "check_verdict",     h.judge_check,          "same/next step/idle"),
    Row(all_but("check"),    "check_verdict",     h.ignore,               "same"),
    Row(CONFIRM,             "operator_ack",      h.confirm_step,         "next step/idle"),
    Row(CHECK,               "operator_ack",      h.fail_check,           "idle (not released)"),
    Row(all_but("confirm", "check"), "operator_ack", h.ignore,            "same"),
    Row(ANY,                 "camera_moved",      h.note_camera,          "same"),
    Row(ANY,                 "picture_state",     h.note_picture,         "same"),
    Row(ANY,                 "link_status",       h.note_link,            "same"),
    Row(ANY,                 "detector_fault",    h.note_detector_fault,  "same"),
    Row(ANY,                 "frame_stale",       h.note_frame_stale,     "same"),
    Row(ANY,                 "link_event",        h.note_link_event,      "same"),
    Row(ANY,                 "tick",              h.ignore,               "same"),
)
# fmt: on


def _index(rows: tuple[Row, ...]) -> dict[tuple[Phase, str], Handler]:
    lookup: dict[tuple[Phase, str], Handler] = {}
    for row in rows:
        if row.kind not in OBSERVATION_TYPES:
            raise ValueError(f"transition row kind must be an observation kind, got {row.kind!r}")
        for phase in row.phases:
            if (phase, row.kind) in lookup:
                raise ValueError(f"transition table has two rows for ({phase!r}, {row.kind!r})")
            lookup[(phase, row.kind)] = row.handler
    return lookup


TRANSITIONS: dict[tuple[Phase, str], Handler] = _index(TABLE)


def handler_for(phase: Phase, kind: str) -> Handler:
    return TRANSITIONS[(phase, kind)]
