"""The event kinds: one frozen dataclass each, the reference for what a step log holds.

Every event has ``t_s`` (the time of the observation that caused it, seconds on the station's
clock) and ``serial`` (the unit it belongs to, None for station-level events); the fields below
are its ``data`` object on disk, under the same names (a step's kind is stored as ``kind``).
Fields marked "only when ..." are left out of ``data`` while they hold their default. Read them
with attribute access or ``isinstance``/``match``; by convention modules that also use the
observations import this module as ``ev`` (``ev.TighteningResult`` is the logged attempt,
``observations.TighteningResult`` the controller's report of it).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import ClassVar

from stationcheck.core.events import Event, check_fields, written_if_set
from stationcheck.core.observations import PositionRef

__all__ = [
    "AlarmCleared", "AlarmRaised", "CheckRef", "CheckVerdict", "Measured", "PictureQuality",
    "PlannedPosition", "PlannedStep", "PositionCompleted", "PositionFailed", "PositionRef",
    "RunStarted", "RunStopped", "StationReset", "StepCompleted", "StepStarted",
    "TighteningResult", "ToolEnabled", "ToolInhibited", "UnitEnded", "UnitStarted",
]  # fmt: skip


@dataclass(frozen=True)
class PlannedStep:
    """A step of a unit's pass: its id in the station config and its step kind."""

    id: str
    kind: str

    def __post_init__(self) -> None:
        check_fields(self)


@dataclass(frozen=True)
class PlannedPosition:
    """A fastener position of a pass; ``number`` is 1-based in the step's tightening order."""

    step: str
    zone: str
    number: int

    def __post_init__(self) -> None:
        check_fields(self)

    @property
    def ref(self) -> PositionRef:
        return PositionRef(self.step, self.zone)


@dataclass(frozen=True)
class CheckRef:
    """A check step and its check zone."""

    step: str
    zone: str

    def __post_init__(self) -> None:
        check_fields(self)


@dataclass(frozen=True)
class Measured:
    """A measured quantity with the step's configured limits (None: not measured / no limit);
    ``unit`` names the unit of all three (``Nm`` for torque, ``deg`` for angle)."""

    value: float | None
    low: float | None
    high: float | None
    unit: str

    def __post_init__(self) -> None:
        check_fields(self)


@dataclass(frozen=True)
class UnitStarted(Event):
    """A unit, or a rework pass of it, opened. ``steps`` and ``positions`` are what this pass
    must do (a rework pass keeps its rework positions' fasten steps and every check step);
    ``rework_positions`` are those asked for. ``station`` is the config's station name (empty in
    logs from before it was recorded); ``demo_data`` only when the station is the invented demo.
    ``model_sha256`` is the SHA-256 of the keypoint model that decides the unit, only when the
    caller knows it (empty in older logs and in runs without a model file)."""

    kind: ClassVar[str] = "unit_started"
    rework: bool
    steps: tuple[PlannedStep, ...]
    positions: tuple[PlannedPosition, ...]
    rework_positions: tuple[PositionRef, ...]
    station: str = ""
    demo_data: bool = written_if_set(False)
    model_sha256: str = written_if_set("")


@dataclass(frozen=True)
class StepStarted(Event):
    """A step became the current one: ``index`` of ``count`` steps in this pass (0-based)."""

    kind: ClassVar[str] = "step_started"
    data_keys: ClassVar[dict[str, str]] = {"step_kind": "kind"}
    step: str
    step_kind: str
    index: int
    count: int


@dataclass(frozen=True)
class StepCompleted(Event):
    """A step finished with ``result`` (OK / NotOK / NotDecidable); ``ended_by`` is
    ``completed`` or why the unit ended it early (``check_failed``, ``abort``, ``new_unit``,
    ``stopped_on_failure``). ``started_t_s`` is the step's start (None if unknown);
    ``failed_positions`` its NOK fastener positions. Only for some steps: ``zone`` (the bin or
    check zone), ``active_ms`` (a pick's bin activity), ``expect``/``verdict``/``margin`` (a
    check's judgement), ``evidence_path`` (an image kept for the step)."""

    kind: ClassVar[str] = "step_completed"
    data_keys: ClassVar[dict[str, str]] = {"step_kind": "kind"}
    step: str
    step_kind: str
    index: int
    result: str
    ended_by: str
    started_t_s: float | None
    failed_positions: tuple[PositionRef, ...]
    zone: str | None = written_if_set()
    active_ms: float | None = written_if_set()
    expect: str | None = written_if_set()
    verdict: str | None = written_if_set()
    margin: float | None = written_if_set()
    evidence_path: str | None = written_if_set()


@dataclass(frozen=True)
class ToolEnabled(Event):
    """The enable output went on for ``position`` (its number in the tightening order) at
    ``zone`` of ``step``, for ``attempt`` there; ``reason`` is the enable decision's word."""

    kind: ClassVar[str] = "tool_enabled"
    step: str
    zone: str
    position: int
    attempt: int
    reason: str


@dataclass(frozen=True)
class ToolInhibited(Event):
    """The enable output went off; ``reason`` says why (e.g. ``tip_outside_target``,
    ``link_lost``). ``step``/``zone`` only when there was a target position. When a run stops
    (``reason`` ``stopped_on_request`` or ``stopped_on_error``) the station writes one more with
    ``was_enabled`` (the enable's last state) and, on an error, its first line as ``error``."""

    kind: ClassVar[str] = "tool_inhibited"
    reason: str
    step: str | None = written_if_set()
    zone: str | None = written_if_set()
    was_enabled: bool | None = written_if_set()
    error: str | None = written_if_set()


@dataclass(frozen=True)
class RunStarted(Event):
    """The tool reported running while enabled for this position."""

    kind: ClassVar[str] = "run_started"
    step: str
    zone: str
    position: int


@dataclass(frozen=True)
class RunStopped(Event):
    """The tool reported it stopped; ``awaiting_result`` when a tightening result is due."""

    kind: ClassVar[str] = "run_stopped"
    awaiting_result: bool


@dataclass(frozen=True)
class TighteningResult(Event):
    """A counted tightening attempt: the controller's ``result`` (authoritative), its
    ``torque``/``angle`` with the step's limits, ``within_limits`` against those limits, the
    controller's ``sequence`` number (None if it sends none), the attempt's start (the enable,
    None if unknown) and end in station seconds. ``run_cut`` only when the enable was cut during
    the run (its reason); ``evidence_path`` only when an image was kept."""

    kind: ClassVar[str] = "tightening_result"
    step: str
    zone: str
    position: int
    attempt: int
    max_attempts: int
    rework: bool
    result: str
    torque: Measured
    angle: Measured
    within_limits: bool
    sequence: int | None
    started_t_s: float | None
    ended_t_s: float
    run_cut: str = written_if_set("")
    evidence_path: str | None = written_if_set()


@dataclass(frozen=True)
class PositionCompleted(Event):
    """A fastener position got its OK result after ``attempts`` attempts."""

    kind: ClassVar[str] = "position_completed"
    step: str
    zone: str
    position: int
    attempts: int
    rework: bool


@dataclass(frozen=True)
class PositionFailed(Event):
    """A fastener position used up its attempts (NOK) and needs rework."""

    kind: ClassVar[str] = "position_failed"
    step: str
    zone: str
    position: int
    attempts: int
    rework: bool


@dataclass(frozen=True)
class CheckVerdict(Event):
    """The presence judgement of the current check step changed: ``verdict`` (``present``,
    ``absent`` or ``undecided``) against ``expect``; ``margin`` is the judge's own figure."""

    kind: ClassVar[str] = "check_verdict"
    step: str
    zone: str
    verdict: str
    expect: str
    margin: float


@dataclass(frozen=True)
class UnitEnded(Event):
    """The pass closed: ``result``, whether the unit is ``released``, ``ended_by`` (as for
    :class:`StepCompleted`) and a ``reason`` in words; its failed and unfinished fastener
    positions, failed checks (empty in logs from before they were recorded), its start, its
    cycle time in seconds and the alarm codes raised during it."""

    kind: ClassVar[str] = "unit_ended"
    result: str
    released: bool
    ended_by: str
    reason: str
    rework: bool
    failed_positions: tuple[PositionRef, ...]
    unfinished_positions: tuple[PositionRef, ...]
    started_t_s: float
    cycle_time_s: float
    alarms: tuple[str, ...]
    failed_checks: tuple[CheckRef, ...] = ()


@dataclass(frozen=True)
class AlarmRaised(Event):
    """An alarm or warning of the catalogue in :mod:`stationcheck.core.alarms`: its ``code``,
    ``number`` (the PLC's alarm register), ``severity``, ``subject`` (the zone or thing it is
    about, may be empty) and ``message``. Conditions also get :class:`AlarmCleared`. Only for
    some codes: ``expected`` (the zone that was due), ``zone``, ``step``/``expect``/``verdict``
    (a failed check), and for a rejected tightening result ``reason``, ``result``,
    ``torque_nm``, ``angle_deg`` and ``sequence``."""

    kind: ClassVar[str] = "alarm_raised"
    code: str
    number: int
    severity: str
    subject: str
    message: str
    expected: str | None = written_if_set()
    zone: str | None = written_if_set()
    step: str | None = written_if_set()
    expect: str | None = written_if_set()
    verdict: str | None = written_if_set()
    reason: str | None = written_if_set()
    result: str | None = written_if_set()
    torque_nm: float | None = written_if_set()
    angle_deg: float | None = written_if_set()
    sequence: int | None = written_if_set()


@dataclass(frozen=True)
class AlarmCleared(Event):
    """A condition alarm (``code`` about ``subject``) stopped."""

    kind: ClassVar[str] = "alarm_cleared"
    code: str
    subject: str


@dataclass(frozen=True)
class StationReset(Event):
    """An explicit reset of the station, with its ``reason``."""

    kind: ClassVar[str] = "station_reset"
    reason: str


@dataclass(frozen=True)
class PictureQuality(Event):
    """The camera picture's figures (mean grey level, grey-level spread, noise sigma, variance of
    the Laplacian, JPEG block ratio) and whether bins and checks can be judged (``judgeable``)
    and the camera's position checked (``camera_checkable``); ``reason`` says why not."""

    kind: ClassVar[str] = "picture_quality"
    judgeable: bool
    camera_checkable: bool
    reason: str
    brightness: float
    contrast: float
    noise_sigma: float
    sharpness: float
    blockiness: float
