"""The sequencer's immutable state: the unit (event-derived) plus what it knows of the station."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal

from stationcheck.core.observations import PositionRef
from stationcheck.core.progress import UnitProgress

Phase = Literal["idle", "fasten", "pick", "check", "confirm"]


@dataclass(frozen=True)
class ToolView:
    """What the latest frames said about the tool tip."""

    last_frame_t_s: float | None = None
    frame_age_ms: float = 0.0
    frozen_ms: float = 0.0  # the picture has not changed for this long
    visible: bool = False
    seen: bool = False  # measured in the latest frame (not only held through the grace)
    seen_once: bool = False
    zone: str | None = None
    arrived_zone: str | None = None
    visit_since_t_s: float | None = None

    @property
    def visit(self) -> tuple[str, float] | None:
        if self.arrived_zone is None or self.visit_since_t_s is None:
            return None
        return (self.arrived_zone, self.visit_since_t_s)


@dataclass(frozen=True)
class Health:
    """Station conditions that inhibit the tool while they last."""

    link_ok: bool = True
    camera_moved: bool = False
    shift_px: float = 0.0
    detector_fault: str | None = None  # reason; cleared by the next zone observation
    frame_stale: bool = False  # said by the frame source; cleared by the next zone observation
    cannot_judge: str | None = None  # why the picture is too poor to judge bins and checks
    camera_unchecked: str | None = None  # why the picture is too poor to check the camera


@dataclass(frozen=True)
class ToolControl:
    """The enable output and what it has been granted for."""

    enabled: bool = False
    reason: str = "no_unit"  # the rule that decided the enable output
    enabled_for: PositionRef | None = None  # a result now counts for this position
    attempt_started_t_s: float | None = None
    running: bool = False
    running_for: PositionRef | None = None  # a tightening in progress here keeps enable on
    run_started_t_s: float | None = None  # start of the run in progress, granted or not
    run_cut: str = ""  # why the enable was cut during this attempt's run ("" = not cut)
    result_pending: bool = False
    credit_for: PositionRef | None = None  # the run now going started enabled at this position
    result_status: str = "none"  # the last result: "accepted" or "rejected_<reason>"
    hold_off_until_t_s: float | None = None  # after a reset or a result, dwell again first
    hold_off_reason: str = "reset_hold"  # the enable reason while the hold lasts
    last_sequence: int | None = None
    quiet_visit: tuple[str, float] | None = None  # a visit not to flag as wrong position


@dataclass(frozen=True)
class ActiveAlarm:
    code: str
    subject: str = ""


@dataclass(frozen=True)
class SequencerState:
    now_t_s: float | None = None
    unit: UnitProgress | None = None
    tool: ToolView = field(default_factory=ToolView)
    health: Health = field(default_factory=Health)
    control: ToolControl = field(default_factory=ToolControl)
    active_bins: tuple[tuple[str, float], ...] = ()  # bin zone, active since
    check_verdict: str | None = None  # latest verdict during the current check step
    alarms: tuple[ActiveAlarm, ...] = ()
    last_event: str | None = None  # the latest one-off alarm or warning (latched)
    event_count: int = 0  # one-off alarms and warnings since the start

    @property
    def phase(self) -> Phase:
        step = self.unit.current_step if self.unit is not None else None
        if step is None:
            return "idle"
        kind: Phase = step.kind  # type: ignore[assignment]
        return kind

    @property
    def open_unit(self) -> UnitProgress | None:
        return self.unit if self.unit is not None and self.unit.is_open else None

    def bin_active_since(self, zone: str) -> float | None:
        for name, since in self.active_bins:
            if name == zone:
                return since
        return None
