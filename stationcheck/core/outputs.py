"""What the sequencer says after every observation: the enable output, guidance and status."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal, get_args

from stationcheck.core.observations import PositionRef
from stationcheck.core.validation import require_bool, require_finite, require_one_of

GuidanceKind = Literal[
    "wait_for_unit",  # no unit open
    "unit_finished",  # the last unit closed; waiting for the next one
    "fasten",  # fasten the target position
    "rework",  # fasten the target position again (rework pass)
    "take_part",  # take a part from the target bin
    "check",  # make the target check zone show what it must
    "acknowledge",  # do the manual action and acknowledge it
    "wrong_position",  # the tip is at another fastener position; go to the target
    "wrong_bin",  # activity in another bin; take from the target bin
    "show_tool",  # the tool is out of view; bring it back
    "inhibited",  # a station fault keeps the tool off
]
GUIDANCE_KINDS: tuple[str, ...] = get_args(GuidanceKind)

UnitStatus = Literal["idle", "running", "ok", "nok", "aborted"]
UNIT_STATUSES: tuple[str, ...] = get_args(UnitStatus)


@dataclass(frozen=True)
class Guidance:
    """An instruction for the operator screen: what to do, where, in plain words."""

    kind: GuidanceKind
    target: str | None
    words: str

    def __post_init__(self) -> None:
        require_one_of("Guidance", "kind", self.kind, GUIDANCE_KINDS)
        if not self.words:
            raise ValueError("Guidance.words must not be empty")


@dataclass(frozen=True)
class Output:
    """The station outputs after one observation.

    ``alarms`` lists the alarm codes active now (conditions such as ``camera_moved`` and
    ``wrong_position``); one-off alarms are events, the latest latched in ``last_event``.
    """

    t_s: float
    tool_enabled: bool
    guidance: Guidance
    unit_status: UnitStatus
    serial: str | None = None
    rework: bool = False
    step_id: str | None = None
    step_number: int = 0  # 1-based within the unit's pass; 0 when no unit is open
    step_count: int = 0
    target: PositionRef | None = None
    position_number: int = 0  # 1-based in the step's tightening order; 0 when not fastening
    attempt: int = 0  # the attempt the next result will count as; 0 when not fastening
    failed_positions: tuple[PositionRef, ...] = ()
    alarms: tuple[str, ...] = ()
    enable_reason: str = "no_unit"  # the rule that decided tool_enabled (see core.conditions)
    ended_by: str | None = None  # how the shown unit ended (None while open or none)
    result_status: str = "none"  # the last tightening result: accepted or rejected_<reason>
    last_event: str | None = None  # the latest one-off alarm or warning, latched
    event_count: int = 0  # one-off alarms and warnings so far

    def __post_init__(self) -> None:
        require_finite("Output", "t_s", self.t_s)
        require_bool("Output", "tool_enabled", self.tool_enabled)
        require_one_of("Output", "unit_status", self.unit_status, UNIT_STATUSES)
        if self.tool_enabled and self.target is None:
            raise ValueError("Output.target must be set when tool_enabled is true, got None")
