"""What the sequencer is told: one record per thing that happened, each with its time.

A recorded stream of these (JSON lines of :func:`observation_to_dict`) replays to the identical
events, so every field that influences a decision lives here and nothing else does.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar, Literal, get_args

from stationcheck.core.validation import (
    require_at_least,
    require_bool,
    require_finite,
    require_one_of,
    require_optional_finite,
    require_point,
    require_text,
)
from stationcheck.errors import InputFileError

Verdict = Literal["present", "absent", "undecided"]
VERDICTS: tuple[str, ...] = get_args(Verdict)


@dataclass(frozen=True)
class PositionRef:
    """One fastener position of a unit: a zone within a fasten step."""

    step: str
    zone: str

    def __post_init__(self) -> None:
        require_text("PositionRef", "step", self.step)
        require_text("PositionRef", "zone", self.zone)

    def to_dict(self) -> dict[str, str]:
        return {"step": self.step, "zone": self.zone}

    @classmethod
    def from_dict(cls, data: Mapping[str, Any]) -> PositionRef:
        return cls(step=data["step"], zone=data["zone"])


@dataclass(frozen=True)
class ObservationBase:
    kind: ClassVar[str] = ""
    t_s: float

    def __post_init__(self) -> None:
        require_finite(type(self).__name__, "t_s", self.t_s)

    def to_dict(self) -> dict[str, Any]:
        """Same as :func:`observation_to_dict`; :func:`observation_from_dict` inverts it."""
        out: dict[str, Any] = {"kind": self.kind}
        for field in dataclasses.fields(self):
            out[field.name] = _encode(getattr(self, field.name))
        return out


@dataclass(frozen=True)
class ZoneObservation(ObservationBase):
    """Where the tool tip is after hysteresis, and where it has dwelled long enough ("arrived").

    ``since_t_s`` is when the tip entered ``zone``; with the zone it names one visit.
    ``frame_age_ms`` is how old the frame was when it was judged (0 when unknown, e.g. replay).
    ``frozen_ms`` is how long the picture has shown no change beyond the camera's noise (0 when
    it changed, or when nobody measured it). ``seen`` is False while the tracker holds an
    unseen tip through its lost-track grace: such a frame may keep an enable, never grant one.
    """

    kind: ClassVar[str] = "zone"
    frame_index: int
    zone: str | None
    arrived_zone: str | None
    since_t_s: float | None
    dwell_ms: float
    visible: bool
    tip_px: tuple[float, float] | None = None
    frame_age_ms: float = 0.0
    frozen_ms: float = 0.0
    seen: bool = True  # the tip was measured in this frame (False: held through the grace)

    def __post_init__(self) -> None:
        super().__post_init__()
        if self.frame_index < 0:
            raise ValueError(f"ZoneObservation.frame_index must be >= 0, got {self.frame_index}")
        require_bool("ZoneObservation", "visible", self.visible)
        require_bool("ZoneObservation", "seen", self.seen)
        require_at_least("ZoneObservation", "dwell_ms", self.dwell_ms, 0.0)
        require_at_least("ZoneObservation", "frame_age_ms", self.frame_age_ms, 0.0)
        require_at_least("ZoneObservation", "frozen_ms", self.frozen_ms, 0.0)
        require_point("ZoneObservation", "tip_px", self.tip_px)
        if self.zone is not None and not self.visible:
            raise ValueError(
                f"ZoneObservation.zone must be None when not visible, got {self.zone!r}"
            )
        if self.arrived_zone is not None and self.arrived_zone != self.zone:
            raise ValueError(
                f"ZoneObservation.arrived_zone must be None or equal zone {self.zone!r}, "
                f"got {self.arrived_zone!r}"
            )
        if (self.zone is None) != (self.since_t_s is None):
            raise ValueError(
                "ZoneObservation.since_t_s must be set exactly when zone is set, got "
                f"zone={self.zone!r} since_t_s={self.since_t_s!r}"
            )
        require_optional_finite("ZoneObservation", "since_t_s", self.since_t_s)


@dataclass(frozen=True)
class UnitStarted(ObservationBase):
    """A unit arrived. For a rework pass the caller looks up the failed positions in the log."""

    kind: ClassVar[str] = "unit_started"
    serial: str
    rework: bool = False
    rework_positions: tuple[PositionRef, ...] = ()

    def __post_init__(self) -> None:
        super().__post_init__()
        require_text("UnitStarted", "serial", self.serial)
        require_bool("UnitStarted", "rework", self.rework)
        if self.rework_positions and not self.rework:
            raise ValueError(
                "UnitStarted.rework_positions must be empty unless rework is true, got "
                f"{len(self.rework_positions)} positions"
            )


@dataclass(frozen=True)
class ToolRunning(ObservationBase):
    kind: ClassVar[str] = "tool_running"
    on: bool

    def __post_init__(self) -> None:
        super().__post_init__()
        require_bool("ToolRunning", "on", self.on)


@dataclass(frozen=True)
class TighteningResult(ObservationBase):
    """The tightening controller's verdict; ``sequence`` is its result counter, if it has one."""

    kind: ClassVar[str] = "tightening_result"
    ok: bool
    torque_nm: float | None = None
    angle_deg: float | None = None
    sequence: int | None = None

    def __post_init__(self) -> None:
        super().__post_init__()
        require_bool("TighteningResult", "ok", self.ok)
        require_optional_finite("TighteningResult", "torque_nm", self.torque_nm)
        require_optional_finite("TighteningResult", "angle_deg", self.angle_deg)
        if self.sequence is not None and (
            not isinstance(self.sequence, int) or isinstance(self.sequence, bool)
        ):
            raise ValueError(
                f"TighteningResult.sequence must be an int or None, got {self.sequence!r}"
            )


@dataclass(frozen=True)
class OperatorAck(ObservationBase):
    kind: ClassVar[str] = "operator_ack"


@dataclass(frozen=True)
class Reset(ObservationBase):
    """Drops enable and forgets the tool's transient state; the open unit stays where it is."""

    kind: ClassVar[str] = "reset"
    reason: str

    def __post_init__(self) -> None:
        super().__post_init__()
        require_text("Reset", "reason", self.reason)


@dataclass(frozen=True)
class Abort(ObservationBase):
    """Ends the open unit unreleased."""

    kind: ClassVar[str] = "abort"
    reason: str

    def __post_init__(self) -> None:
        super().__post_init__()
        require_text("Abort", "reason", self.reason)


@dataclass(frozen=True)
class Tick(ObservationBase):
    """Time passes with nothing else to say (lets timers such as stale frames fire)."""

    kind: ClassVar[str] = "tick"


@dataclass(frozen=True)
class BinActivity(ObservationBase):
    """Something is (or stopped) reaching into a bin zone, judged from the image."""

    kind: ClassVar[str] = "bin_activity"
    zone: str
    active: bool

    def __post_init__(self) -> None:
        super().__post_init__()
        require_text("BinActivity", "zone", self.zone)
        require_bool("BinActivity", "active", self.active)


@dataclass(frozen=True)
class CheckVerdict(ObservationBase):
    """The presence judgement of a check zone at this moment; ``margin`` is the judge's own."""

    kind: ClassVar[str] = "check_verdict"
    zone: str
    verdict: Verdict
    margin: float = 0.0

    def __post_init__(self) -> None:
        super().__post_init__()
        require_text("CheckVerdict", "zone", self.zone)
        require_one_of("CheckVerdict", "verdict", self.verdict, VERDICTS)
        require_finite("CheckVerdict", "margin", self.margin)


@dataclass(frozen=True)
class CameraMoved(ObservationBase):
    kind: ClassVar[str] = "camera_moved"
    moved: bool
    shift_px: float = 0.0

    def __post_init__(self) -> None:
        super().__post_init__()
        require_bool("CameraMoved", "moved", self.moved)
        require_at_least("CameraMoved", "shift_px", self.shift_px, 0.0)


@dataclass(frozen=True)
class PictureState(ObservationBase):
    """Whether the camera picture is good enough for the image judgements. ``judgeable`` False:
    bins and check zones cannot be judged (too dark, noisy, blurred or blocky);
    ``camera_checkable`` False: the picture is too poor to check the camera's position.
    ``reason`` says why in a few words (empty when both hold). The figures (grey levels, the
    variance of the Laplacian, a ratio) go to the step log of the open unit."""

    kind: ClassVar[str] = "picture_state"
    judgeable: bool
    camera_checkable: bool
    reason: str = ""
    brightness: float = 0.0
    contrast: float = 0.0
    noise_sigma: float = 0.0
    sharpness: float = 0.0
    blockiness: float = 0.0

    def __post_init__(self) -> None:
        super().__post_init__()
        require_bool("PictureState", "judgeable", self.judgeable)
        require_bool("PictureState", "camera_checkable", self.camera_checkable)
        if not isinstance(self.reason, str):
            raise TypeError(f"PictureState.reason must be text, got {self.reason!r}")
        for name in ("brightness", "contrast", "noise_sigma", "sharpness", "blockiness"):
            require_at_least("PictureState", name, getattr(self, name), 0.0)


@dataclass(frozen=True)
class LinkStatus(ObservationBase):
    kind: ClassVar[str] = "link_status"
    ok: bool

    def __post_init__(self) -> None:
        super().__post_init__()
        require_bool("LinkStatus", "ok", self.ok)


@dataclass(frozen=True)
class DetectorFault(ObservationBase):
    """The detector failed on a frame; the next zone observation clears it."""

    kind: ClassVar[str] = "detector_fault"
    reason: str

    def __post_init__(self) -> None:
        super().__post_init__()
        require_text("DetectorFault", "reason", self.reason)


@dataclass(frozen=True)
class FrameStale(ObservationBase):
    """No new frame in time (said by the frame source); the next zone observation clears it."""

    kind: ClassVar[str] = "frame_stale"
    age_ms: float = 0.0

    def __post_init__(self) -> None:
        super().__post_init__()
        require_at_least("FrameStale", "age_ms", self.age_ms, 0.0)


@dataclass(frozen=True)
class LinkEvent(ObservationBase):
    """Something the signal link saw that the station logs and the PLC can read back: a PLC
    session restart, a refused serial. ``code`` names a one-off alarm of the alarm list."""

    kind: ClassVar[str] = "link_event"
    code: str
    detail: str = ""

    def __post_init__(self) -> None:
        from stationcheck.core.alarms import ALARMS

        super().__post_init__()
        require_text("LinkEvent", "code", self.code)
        if self.code not in ALARMS or ALARMS[self.code].condition:
            raise ValueError(f"LinkEvent.code must be a one-off alarm, got {self.code!r}")


Observation = (
    ZoneObservation
    | UnitStarted
    | ToolRunning
    | TighteningResult
    | OperatorAck
    | Reset
    | Abort
    | Tick
    | BinActivity
    | CheckVerdict
    | CameraMoved
    | PictureState
    | LinkStatus
    | DetectorFault
    | FrameStale
    | LinkEvent
)
OBSERVATION_TYPES: dict[str, type[ObservationBase]] = {
    cls.kind: cls for cls in get_args(Observation)
}


def _encode(value: Any) -> Any:
    if isinstance(value, PositionRef):
        return value.to_dict()
    if isinstance(value, tuple):
        return [_encode(item) for item in value]
    return value


def observation_to_dict(observation: Observation) -> dict[str, Any]:
    """A JSON-ready mapping with a ``kind`` key; :func:`observation_from_dict` inverts it."""
    return observation.to_dict()


def observation_from_dict(data: Mapping[str, Any]) -> Observation:
    """Rebuild an observation; a malformed mapping raises :class:`InputFileError`."""
    kind = data.get("kind")
    cls = OBSERVATION_TYPES.get(str(kind))
    if cls is None:
        raise InputFileError(
            f"observation kind must be one of {sorted(OBSERVATION_TYPES)}, got {kind!r}"
        )
    names = {field.name for field in dataclasses.fields(cls)}
    unknown = sorted(set(data) - names - {"kind"})
    if unknown:
        raise InputFileError(
            f"{kind} observation: unknown keys {unknown}; expected {sorted(names)}"
        )
    kwargs = {name: data[name] for name in names if name in data}
    try:
        if kwargs.get("tip_px") is not None:
            kwargs["tip_px"] = tuple(kwargs["tip_px"])
        if "rework_positions" in kwargs:
            kwargs["rework_positions"] = tuple(
                PositionRef.from_dict(item) for item in kwargs["rework_positions"]
            )
        observation = cls(**kwargs)
    except (TypeError, ValueError, KeyError) as exc:
        raise InputFileError(f"{kind} observation is malformed: {exc}") from exc
    return observation  # type: ignore[return-value]
