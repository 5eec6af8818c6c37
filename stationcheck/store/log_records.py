"""What the step log hands back: stored events, derived rows (units, steps, alarms) and pages.

Rows are derived from events only (see :mod:`stationcheck.store.projection`); they are frozen and
checked on construction so a broken projection fails where it happens, not in a report later.
Result words follow the OPC UA joining result model where it fits: OK, NotOK, NotDecidable.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any, Generic, Literal, TypeVar

from stationcheck.core.events import RESULT_NOK, RESULT_OK, RESULT_UNDECIDED, Event
from stationcheck.core.validation import (
    require_at_least,
    require_finite,
    require_one_of,
    require_optional_finite,
    require_text,
)

RESULTS: tuple[str, ...] = (RESULT_OK, RESULT_NOK, RESULT_UNDECIDED)
UNIT_OPEN = "open"
UNIT_STATUSES: tuple[str, ...] = (UNIT_OPEN, *RESULTS)

# What a reviewer asks for -> how it is decided (see queries.py)
RESULT_FILTERS: tuple[str, ...] = ("OK", "NOK", "reworked", "open", "aborted", "first_time_through")
UNIT_ORDERS: tuple[str, ...] = ("newest", "oldest", "serial")
TIME_BASES: tuple[str, ...] = ("t_s", "recorded_at")

TimeBasis = Literal["t_s", "recorded_at"]
RowT = TypeVar("RowT")


@dataclass(frozen=True)
class StoredEvent:
    """An event as the log keeps it: its place in the log and the wall-clock time it was written."""

    seq: int
    recorded_at_s: float
    event: Event

    def __post_init__(self) -> None:
        require_at_least("StoredEvent", "seq", self.seq, 1)
        require_finite("StoredEvent", "recorded_at_s", self.recorded_at_s)


@dataclass(frozen=True)
class UnitRow:
    """One unit (serial) over all its passes: the first pass and any rework passes.

    ``status`` is ``open`` while a pass is open, else the result of the last pass. ``started_*``
    belong to the first pass, ``ended_*`` to the last. ``cycle_time_s`` is the first pass's,
    ``rework_time_s`` the sum of the rework passes'. ``retries`` counts tightening attempts after
    a position's first. First-time-through: first pass OK, no retry, no rework pass.
    """

    serial: str
    status: str
    passes: int
    started_t_s: float
    started_at_s: float
    open_seq: int | None = None  # seq of the open pass's unit_started event
    current_step: str | None = None
    first_result: str | None = None
    result: str | None = None
    ended_by: str | None = None
    released: bool = False
    reworked: bool = False
    first_time_through: bool = False
    ended_t_s: float | None = None
    ended_at_s: float | None = None
    cycle_time_s: float | None = None
    rework_time_s: float = 0.0
    retries: int = 0
    nok_results: int = 0
    alarm_count: int = 0
    failed_positions: tuple[str, ...] = ()
    unfinished_positions: tuple[str, ...] = ()

    def __post_init__(self) -> None:
        require_text("UnitRow", "serial", self.serial)
        require_one_of("UnitRow", "status", self.status, UNIT_STATUSES)
        require_at_least("UnitRow", "passes", self.passes, 1)
        require_finite("UnitRow", "started_t_s", self.started_t_s)
        require_finite("UnitRow", "started_at_s", self.started_at_s)
        for name in ("first_result", "result"):
            value = getattr(self, name)
            if value is not None:
                require_one_of("UnitRow", name, value, RESULTS)
        for name in ("ended_t_s", "ended_at_s", "cycle_time_s"):
            require_optional_finite("UnitRow", name, getattr(self, name))
        if (self.status == UNIT_OPEN) != (self.open_seq is not None):
            raise ValueError(
                f"UnitRow.open_seq must be set exactly when the unit is open, got status "
                f"{self.status!r} open_seq {self.open_seq!r}"
            )

    @property
    def is_open(self) -> bool:
        return self.status == UNIT_OPEN


@dataclass(frozen=True)
class StepRow:
    """One attempt at a fastener position (``kind`` fasten), or one finished pick, check or
    confirm step. ``pass_no`` 1 is the first pass, 2 and later are rework passes.
    ``position_result`` is set on the attempt that decided the position (OK, or NotOK when the
    attempts ran out)."""

    seq: int
    serial: str
    pass_no: int
    step: str
    kind: str
    result: str
    ended_t_s: float
    recorded_at_s: float
    position: str | None = None  # the zone id
    position_number: int | None = None
    attempt: int = 1
    max_attempts: int | None = None
    torque_nm: float | None = None
    torque_low_nm: float | None = None
    torque_high_nm: float | None = None
    angle_deg: float | None = None
    angle_low_deg: float | None = None
    angle_high_deg: float | None = None
    within_limits: bool | None = None
    sequence: int | None = None  # the tightening controller's result counter
    started_t_s: float | None = None
    position_result: str | None = None
    evidence_path: str | None = None
    detail: Mapping[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        require_at_least("StepRow", "seq", self.seq, 1)
        require_text("StepRow", "serial", self.serial)
        require_at_least("StepRow", "pass_no", self.pass_no, 1)
        require_text("StepRow", "step", self.step)
        require_one_of("StepRow", "result", self.result, RESULTS)
        require_at_least("StepRow", "attempt", self.attempt, 1)
        require_finite("StepRow", "ended_t_s", self.ended_t_s)
        for name in (
            "torque_nm",
            "torque_low_nm",
            "torque_high_nm",
            "angle_deg",
            "angle_low_deg",
            "angle_high_deg",
            "started_t_s",
        ):
            require_optional_finite("StepRow", name, getattr(self, name))
        if self.position_result is not None:
            require_one_of("StepRow", "position_result", self.position_result, RESULTS)

    @property
    def is_rework(self) -> bool:
        return self.pass_no > 1


@dataclass(frozen=True)
class AlarmRow:
    """An alarm or warning; ``serial`` is None for station-level ones. Condition alarms get
    ``cleared_t_s`` when they stop."""

    seq: int
    serial: str | None
    t_s: float
    recorded_at_s: float
    code: str
    severity: str = "alarm"
    subject: str = ""
    message: str = ""
    cleared_t_s: float | None = None
    detail: Mapping[str, Any] = field(default_factory=dict)

    def __post_init__(self) -> None:
        require_at_least("AlarmRow", "seq", self.seq, 1)
        require_finite("AlarmRow", "t_s", self.t_s)
        require_text("AlarmRow", "code", self.code)
        require_optional_finite("AlarmRow", "cleared_t_s", self.cleared_t_s)


@dataclass(frozen=True)
class UnitQuery:
    """Which units, in what order, which page. Filters combine with AND.

    ``result``: OK (released), NOK (last pass NotOK), reworked (had a rework pass), open,
    aborted (ended NotDecidable: aborted or replaced), first_time_through.
    ``after`` is the ``next_after`` token of the previous page (keyset paging, fast at any
    depth); ``offset`` also works but gets slower the deeper it goes.
    ``time_basis`` picks the clock for ranges and order: ``recorded_at`` (wall clock, the default:
    a live camera's ``t_s`` is a monotonic clock that restarts with the PC) or ``t_s`` (the
    events' own time, e.g. seconds into a replayed video).
    """

    serial: str | None = None
    serial_prefix: str | None = None
    from_s: float | None = None  # inclusive, on the unit's first-pass start
    to_s: float | None = None  # exclusive
    time_basis: TimeBasis = "recorded_at"
    result: str | None = None
    failed_position: str | None = None
    alarm_code: str | None = None
    order: str = "newest"
    limit: int = 50
    offset: int = 0
    after: str | None = None
    count_total: bool = True

    def __post_init__(self) -> None:
        require_one_of("UnitQuery", "time_basis", self.time_basis, TIME_BASES)
        require_one_of("UnitQuery", "order", self.order, UNIT_ORDERS)
        if self.result is not None:
            require_one_of("UnitQuery", "result", self.result, RESULT_FILTERS)
        require_optional_finite("UnitQuery", "from_s", self.from_s)
        require_optional_finite("UnitQuery", "to_s", self.to_s)
        if not 1 <= self.limit <= 10_000:
            raise ValueError(f"UnitQuery.limit must be in 1..10000, got {self.limit!r}")
        if self.offset < 0:
            raise ValueError(f"UnitQuery.offset must be >= 0, got {self.offset!r}")
        if self.after is not None and self.offset:
            raise ValueError("UnitQuery: use either after (keyset) or offset, not both")


@dataclass(frozen=True)
class Page(Generic[RowT]):
    """One page of rows; ``total`` is the count of all matching rows (None if not asked for);
    ``next_after`` continues after the last row (None on the last page)."""

    rows: tuple[RowT, ...]
    total: int | None
    next_after: str | None = None
