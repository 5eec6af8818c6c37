"""What the core needs to know about one station, free of YAML and validation concerns.

The config package validates a YAML file and builds a :class:`StationPlan`; the core (zones,
tracker, sequencer) consumes only these records.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

ZoneKind = Literal["fastener", "bin", "check"]
FailurePolicy = Literal["continue", "stop_unit"]
Presence = Literal["present", "absent"]


@dataclass(frozen=True)
class ZoneSpec:
    id: str
    kind: ZoneKind
    polygon_px: tuple[tuple[float, float], ...]
    label: str = ""


@dataclass(frozen=True)
class Limits:
    """Inclusive acceptance band of a measured value (unit named by the field holding it)."""

    low: float
    high: float

    def __post_init__(self) -> None:
        if not self.low <= self.high:
            raise ValueError(f"Limits.low must be <= high, got low={self.low} high={self.high}")

    def contains(self, value: float) -> bool:
        return self.low <= value <= self.high


@dataclass(frozen=True)
class FastenStep:
    """Fastener positions in required order; each needs an OK tightening result."""

    id: str
    zones: tuple[str, ...]
    max_attempts: int = 2
    on_failure: FailurePolicy = "continue"
    torque_nm: Limits | None = None
    angle_deg: Limits | None = None
    max_run_ms: float | None = None  # None: the station's thresholds.max_run_ms
    kind: Literal["fasten"] = "fasten"


@dataclass(frozen=True)
class PickStep:
    """Activity in the named bin zone for at least ``min_time_ms`` completes the step."""

    id: str
    zone: str
    min_time_ms: float = 300.0
    kind: Literal["pick"] = "pick"


@dataclass(frozen=True)
class CheckStep:
    """The image judgement of the zone must say ``expect`` before the unit is released."""

    id: str
    zone: str
    expect: Presence = "present"
    kind: Literal["check"] = "check"


@dataclass(frozen=True)
class ConfirmStep:
    """An operator or PLC acknowledge completes the step."""

    id: str
    prompt: str
    kind: Literal["confirm"] = "confirm"


Step = FastenStep | PickStep | CheckStep | ConfirmStep


@dataclass(frozen=True)
class Thresholds:
    min_score: float = 0.5
    dwell_ms: float = 200.0
    lost_track_grace_ms: float = 300.0
    hysteresis_px: float = 4.0
    stale_frame_ms: float = 100.0
    max_run_ms: float = 5000.0  # longest tightening run; past it the enable drops


@dataclass(frozen=True)
class StationPlan:
    zones: tuple[ZoneSpec, ...]
    steps: tuple[Step, ...]
    thresholds: Thresholds = Thresholds()
    station: str = ""  # the station's name, for the log
    demo_data: bool = False  # invented data (the demo station): every unit's log says so
    model_sha256: str = ""  # SHA-256 of the coarse model file deciding (empty: no model)

    def zone(self, zone_id: str) -> ZoneSpec:
        for zone in self.zones:
            if zone.id == zone_id:
                return zone
        raise KeyError(zone_id)
