"""The sequencer's transition table: (phase, input kind) -> handler, all in one place.

The phase is the kind of the open unit's current step, or ``idle`` when no unit is open. A
handler records what the input means; the phase after it follows from the unit's events (a
completed step moves to the next step's kind, a closed unit to ``idle``). Each row declares
where it can lead (``leads_to``), so :mod:`stationcheck.core.state_graph` draws the graph from
the table. After every input, whatever its row, :func:`stationcheck.core.conditions.settle`
runs: pick timer, condition alarms, enable output (so a timed step kind, ``StepKind.timed``, can
end after any input). Every (phase, kind) pair has exactly one row; a test checks the table is
total, and another that the sequencer only changes phase along declared edges.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Literal, get_args

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


# Where a row can lead: the phase it was in, the phase of the unit's next step (the first step
# for a new unit; any step kind), or idle (the unit closed).
Target = Literal["same", "step", "idle"]
TO_SAME: Target = "same"
TO_STEP: Target = "step"
TO_IDLE: Target = "idle"
TARGETS: tuple[Target, ...] = get_args(Target)


@dataclass(frozen=True)
class Row:
    phases: tuple[Phase, ...]
    kind: str
    handler: Handler
    leads_to: tuple[Target, ...]


# fmt: off
TABLE: tuple[Row, ...] = (
    #   phases             input kind           handler                leads to
    Row(IDLE,              "unit_started",      h.start_unit,          (TO_STEP, TO_SAME)),
    Row(OPEN,              "unit_started",      h.replace_unit,        (TO_STEP, TO_IDLE)),
    Row(IDLE,              "abort",             h.ignore,              (TO_SAME,)),
    Row(OPEN,              "abort",             h.abort_unit,          (TO_IDLE,)),
    Row(ANY,               "reset",             h.reset_station,       (TO_SAME,)),
    Row(FASTEN,            "tightening_result", h.take_result,         (TO_SAME, TO_STEP, TO_IDLE)),
    Row(all_but("fasten"), "tightening_result", h.reject_result,       (TO_SAME,)),
    Row(ANY,               "tool_running",      h.note_running,        (TO_SAME,)),
    Row(ANY,               "zone",              h.note_zone,           (TO_SAME,)),
    Row(ANY,               "bin_activity",      h.note_bin_activity,   (TO_SAME,)),
    Row(CHECK,             "check_verdict",     h.judge_check,         (TO_SAME, TO_STEP, TO_IDLE)),
    Row(all_but("check"),  "check_verdict",     h.ignore,              (TO_SAME,)),
    Row(CONFIRM,           "operator_ack",      h.confirm_step,        (TO_STEP, TO_IDLE)),
    Row(CHECK,             "operator_ack",      h.fail_check,          (TO_IDLE,)),
    Row(all_but("confirm", "check"), "operator_ack", h.ignore, (TO_SAME,)),
    Row(ANY,               "camera_moved",      h.note_camera,         (TO_SAME,)),
    Row(ANY,               "picture_state",     h.note_picture,        (TO_SAME,)),
    Row(ANY,               "link_status",       h.note_link,           (TO_SAME,)),
    Row(ANY,               "detector_fault",    h.note_detector_fault, (TO_SAME,)),
    Row(ANY,               "frame_stale",       h.note_frame_stale,    (TO_SAME,)),
    Row(ANY,               "link_event",        h.note_link_event,     (TO_SAME,)),
    Row(ANY,               "tick",              h.ignore,              (TO_SAME,)),
)
# fmt: on


def _index(rows: tuple[Row, ...]) -> dict[tuple[Phase, str], Handler]:
    lookup: dict[tuple[Phase, str], Handler] = {}
    for row in rows:
        if row.kind not in OBSERVATION_TYPES:
            raise ValueError(f"transition row kind must be an observation kind, got {row.kind!r}")
        if not row.leads_to or any(target not in TARGETS for target in row.leads_to):
            raise ValueError(
                f"transition row ({row.kind!r}) must lead to some of {TARGETS}, "
                f"got {row.leads_to!r}"
            )
        for phase in row.phases:
            if (phase, row.kind) in lookup:
                raise ValueError(f"transition table has two rows for ({phase!r}, {row.kind!r})")
            lookup[(phase, row.kind)] = row.handler
    return lookup


TRANSITIONS: dict[tuple[Phase, str], Handler] = _index(TABLE)


def handler_for(phase: Phase, kind: str) -> Handler:
    return TRANSITIONS[(phase, kind)]
