"""The station config file format (``format_version: 1``), as pydantic models.

The models check the shape and value range of each entry; relations between entries (a step
naming a zone, overlapping zones, ...) are checked by the lint modules, so that every problem
in a file is found in one pass. Every model forbids unknown keys.
"""

from __future__ import annotations

import os
import re
from pathlib import Path
from typing import Annotated, Any, Literal

from pydantic import (
    AfterValidator,
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Discriminator,
    Field,
    PrivateAttr,
    Strict,
    Tag,
    field_validator,
    model_validator,
)
from pydantic_core import PydanticCustomError

from stationcheck.config import judgement_settings as judgement_defaults
from stationcheck.config.bounds import hard
from stationcheck.config.error_wording import describe_value
from stationcheck.core import bolt_pattern
from stationcheck.core.plan import (
    CheckStep,
    ConfirmStep,
    FastenStep,
    Limits,
    PickStep,
    StationPlan,
    Step,
    Thresholds,
    ZoneSpec,
)
from stationcheck.core.step_kinds import STEP_KINDS

FORMAT_VERSION = 1
BUNDLED_MODEL = "bundled"

ID_PATTERN = re.compile(r"[A-Za-z][A-Za-z0-9_-]{0,63}")


def _check_id(value: str) -> str:
    if not value.strip():
        raise PydanticCustomError("identifier", "is empty: choose or write a name")
    if not ID_PATTERN.fullmatch(value):
        raise PydanticCustomError(
            "identifier",
            "'{value}' is not a usable id: start with a letter, then use only letters, digits, "
            "'_' or '-' (at most 64 characters)",
            {"value": value},
        )
    return value


def _check_text(value: str) -> str:
    if not value.strip():
        raise PydanticCustomError("blank_text", "must not be empty")
    return value


def _check_point(value: Any) -> Any:
    if not isinstance(value, list | tuple) or len(value) != 2:
        raise PydanticCustomError(
            "point",
            "a point is a pair [x, y] of pixel numbers; got {got}",
            {"got": describe_value(value)},
        )
    return value


def _check_camera_source(value: Any) -> int | str:
    if isinstance(value, int) and not isinstance(value, bool) and value >= 0:
        return value
    if isinstance(value, str) and value.strip():
        return value
    raise PydanticCustomError(
        "camera_source",
        "expected a camera index (0, 1, ...), a video file path or a stream URL; got {got}",
        {"got": describe_value(value)},
    )


def _check_model_path(value: str) -> str:
    if value != BUNDLED_MODEL and not value.lower().endswith(".onnx"):
        raise PydanticCustomError(
            "model_path",
            "expected 'bundled' or the path of an .onnx file; got '{value}'",
            {"value": value},
        )
    return value


def _check_format_version(value: int) -> int:
    if value != FORMAT_VERSION:
        raise PydanticCustomError(
            "format_version",
            "this stationcheck reads format_version {expected}; the file says {got}",
            {"expected": FORMAT_VERSION, "got": value},
        )
    return value


Ident = Annotated[str, Strict(), AfterValidator(_check_id)]
Text = Annotated[str, Strict(), AfterValidator(_check_text)]
Number = Annotated[float, Strict()]
Whole = Annotated[int, Strict()]
Flag = Annotated[bool, Strict()]
PointPx = Annotated[tuple[Number, Number], BeforeValidator(_check_point)]
CameraSource = Annotated[Any, AfterValidator(_check_camera_source)]
ModelPath = Annotated[Text, AfterValidator(_check_model_path)]


class _Section(BaseModel):
    model_config = ConfigDict(extra="forbid", frozen=True, allow_inf_nan=False)


class StationSection(_Section):
    name: Text
    reference_frame: Text = Field(description="image file, relative to the config file")
    demo_data: Flag = Field(
        default=False, description="invented data: the step log and screens say so"
    )


class CameraSection(_Section):
    source: CameraSource
    width_px: Whole = Field(gt=0)
    height_px: Whole = Field(gt=0)
    fps: Number = Field(gt=0)


class ModelSection(_Section):
    path: ModelPath = BUNDLED_MODEL
    threads: Whole = Field(default=1, ge=1, le=64)
    min_score: Annotated[Number, hard("model.min_score")] = Thresholds.min_score


class ThresholdsSection(_Section):
    """Hard and sane ranges with their reasons: :mod:`stationcheck.config.bounds`."""

    dwell_ms: Annotated[Number, hard("thresholds.dwell_ms")] = Thresholds.dwell_ms
    lost_track_grace_ms: Annotated[Number, hard("thresholds.lost_track_grace_ms")] = (
        Thresholds.lost_track_grace_ms
    )
    hysteresis_px: Annotated[Number, hard("thresholds.hysteresis_px")] = Thresholds.hysteresis_px
    stale_frame_ms: Annotated[Number, hard("thresholds.stale_frame_ms")] = Thresholds.stale_frame_ms
    max_run_ms: Annotated[Number, hard("thresholds.max_run_ms")] = Thresholds.max_run_ms


class PolygonZone(_Section):
    id: Ident
    kind: Literal["fastener", "bin", "check"]
    label: Annotated[str, Strict()] = ""
    polygon: list[PointPx]

    def to_specs(self) -> list[ZoneSpec]:
        points = tuple((float(x), float(y)) for x, y in self.polygon)
        return [ZoneSpec(id=self.id, kind=self.kind, polygon_px=points, label=self.label)]


class BoltCircle(_Section):
    id_prefix: Ident
    label_prefix: Annotated[str, Strict()] = ""
    centre_px: PointPx
    radius_px: Number = Field(gt=0)
    count: Whole = Field(ge=2, le=128)
    start_angle_deg: Number = -90.0
    zone_size_px: Number = Field(gt=0)


class BoltCircleZones(_Section):
    """Shorthand for ``count`` octagonal fastener zones ``<id_prefix>1..N`` on a circle."""

    bolt_circle: BoltCircle

    def to_specs(self) -> list[ZoneSpec]:
        circle = self.bolt_circle
        polygons = bolt_pattern.bolt_circle_zones_px(
            circle.centre_px,
            circle.radius_px,
            circle.count,
            circle.start_angle_deg,
            circle.zone_size_px,
        )
        label_prefix = circle.label_prefix.strip()
        return [
            ZoneSpec(
                id=f"{circle.id_prefix}{number}",
                kind="fastener",
                polygon_px=tuple(polygon),
                label=f"{label_prefix} {number}" if label_prefix else "",
            )
            for number, polygon in enumerate(polygons, start=1)
        ]


def _zone_entry_tag(value: Any) -> str:
    if (isinstance(value, dict) and "bolt_circle" in value) or isinstance(value, BoltCircleZones):
        return "bolt_circle"
    return "polygon"


ZoneEntry = Annotated[
    Annotated[PolygonZone, Tag("polygon")] | Annotated[BoltCircleZones, Tag("bolt_circle")],
    Discriminator(_zone_entry_tag),
]


class LimitsSection(_Section):
    low: Number
    high: Number

    @model_validator(mode="after")
    def _low_not_above_high(self) -> LimitsSection:
        if self.low > self.high:
            raise PydanticCustomError(
                "limits_order",
                "low ({low}) is above high ({high}); no value could pass",
                {"low": f"{self.low:g}", "high": f"{self.high:g}"},
            )
        return self

    def to_limits(self) -> Limits:
        return Limits(low=self.low, high=self.high)


class FastenSection(_Section):
    id: Ident
    kind: Literal["fasten"]
    zones: list[Ident] = Field(min_length=1)
    order: Literal["listed", "cross"] = "listed"
    max_attempts: Whole = Field(default=2, ge=1, le=20)
    on_failure: Literal["continue", "stop_unit"] = "continue"
    torque_nm: LimitsSection | None = None
    angle_deg: LimitsSection | None = None
    max_run_ms: Annotated[Number, hard("steps[].max_run_ms")] | None = None

    def tightening_order(self) -> list[str]:
        """Zones in the order they are tightened (``cross``: zones listed as bolts 1..N)."""
        if self.order == "cross":
            return bolt_pattern.apply_order(self.zones, bolt_pattern.cross_order(len(self.zones)))
        return list(self.zones)

    def to_step(self) -> FastenStep:
        return FastenStep(
            id=self.id,
            zones=tuple(self.tightening_order()),
            max_attempts=self.max_attempts,
            on_failure=self.on_failure,
            torque_nm=self.torque_nm.to_limits() if self.torque_nm else None,
            angle_deg=self.angle_deg.to_limits() if self.angle_deg else None,
            max_run_ms=self.max_run_ms,
        )


class PickSection(_Section):
    id: Ident
    kind: Literal["pick"]
    zone: Ident
    min_time_ms: Annotated[Number, hard("steps[].min_time_ms")] = 300.0

    def to_step(self) -> PickStep:
        return PickStep(id=self.id, zone=self.zone, min_time_ms=self.min_time_ms)


class CheckSection(_Section):
    id: Ident
    kind: Literal["check"]
    zone: Ident
    expect: Literal["present", "absent"] = "present"

    def to_step(self) -> CheckStep:
        return CheckStep(id=self.id, zone=self.zone, expect=self.expect)


class ConfirmSection(_Section):
    id: Ident
    kind: Literal["confirm"]
    prompt: Text

    def to_step(self) -> ConfirmStep:
        return ConfirmStep(id=self.id, prompt=self.prompt)


StepEntry = Annotated[
    FastenSection | PickSection | CheckSection | ConfirmSection, Field(discriminator="kind")
]
# step kind (core.step_kinds.STEP_KINDS) -> its YAML section; the union above lists the same
STEP_SECTIONS: dict[str, type[_Section]] = {
    "fasten": FastenSection,
    "pick": PickSection,
    "check": CheckSection,
    "confirm": ConfirmSection,
}
STEP_ZONE_KIND = {name: kind.zone_kind for name, kind in STEP_KINDS.items() if kind.zone_kind}


class AddressEntry(_Section):
    table: Literal["coil", "discrete_input", "holding_register", "input_register"]
    address: Whole = Field(ge=0, le=65535)
    count: Whole = Field(default=1, ge=1, le=125)


class PlcSection(_Section):
    mode: Literal["console", "client", "server"] = "console"
    host: Text = "127.0.0.1"
    port: Whole = Field(default=502, ge=1, le=65535)
    device_id: Whole = Field(default=1, ge=0, le=247)
    timeout_ms: Annotated[Number, hard("plc.timeout_ms")] = 50.0
    retries: Whole = Field(default=0, ge=0, le=10)
    address_map: dict[Ident, AddressEntry] = Field(default_factory=dict)
    # PLC link session (stationcheck.plc.link_session): the PLC's liveness counter must change
    # within liveness_timeout_ms; a unit serial must match serial_pattern (Python regex)
    liveness_timeout_ms: Number = Field(default=500.0, ge=20, le=10_000)
    serial_pattern: Text = r"[\x20-\x7e]+"

    @field_validator("serial_pattern")
    @classmethod
    def _serial_pattern_compiles(cls, value: str) -> str:
        try:
            re.compile(value)
        except re.error as exc:
            raise ValueError(f"not a regular expression: {exc}") from exc
        return value


class LogSection(_Section):
    path: Text = "stationcheck-log.sqlite"
    evidence_images: Flag = False
    retention_days: Whole = Field(default=90, ge=1)


class PlantSection(_Section):
    """Where the station sits in the plant: stored with every event, named when forwarding."""

    station_id: Ident
    line: Text = "line"
    plant: Text = "plant"


class BinActivitySection(_Section):
    changed_fraction: Number = Field(
        default=judgement_defaults.BinActivitySettings.changed_fraction, gt=0, le=1
    )
    settle_ms: Annotated[Number, hard("judgements.bin_activity.settle_ms")] = (
        judgement_defaults.BinActivitySettings.settle_ms
    )
    release_ms: Annotated[Number, hard("judgements.bin_activity.release_ms")] = (
        judgement_defaults.BinActivitySettings.release_ms
    )
    tool_reach_px: Annotated[Number, hard("judgements.bin_activity.tool_reach_px")] = (
        judgement_defaults.BinActivitySettings.tool_reach_px
    )


class PresenceSection(_Section):
    min_match: Number = Field(default=judgement_defaults.PresenceSettings.min_match, ge=0, le=1)
    min_margin: Number = Field(default=judgement_defaults.PresenceSettings.min_margin, ge=0, le=2)
    confirm_ms: Annotated[Number, hard("judgements.presence.confirm_ms")] = (
        judgement_defaults.PresenceSettings.confirm_ms
    )
    search_px: Whole = Field(default=judgement_defaults.PresenceSettings.search_px, ge=0, le=32)


class CameraShiftSection(_Section):
    tolerance_px: Number = Field(
        default=judgement_defaults.CameraShiftSettings.tolerance_px, ge=0.5
    )
    interval_ms: Annotated[Number, hard("judgements.camera_shift.interval_ms")] = (
        judgement_defaults.CameraShiftSettings.interval_ms
    )
    confirm_checks: Whole = Field(
        default=judgement_defaults.CameraShiftSettings.confirm_checks, ge=1, le=20
    )


_QUALITY = judgement_defaults.PictureQualitySettings


class PictureQualitySection(_Section):
    """Picture-quality limits: outside them the station says it cannot judge and inhibits."""

    min_brightness: Number = Field(default=_QUALITY.min_brightness, ge=0, le=255)
    min_contrast: Number = Field(default=_QUALITY.min_contrast, ge=0, le=128)
    max_noise_sigma: Number = Field(default=_QUALITY.max_noise_sigma, ge=0, le=128)
    min_sharpness: Number = Field(default=_QUALITY.min_sharpness, ge=0)
    max_blockiness: Number = Field(default=_QUALITY.max_blockiness, ge=1)


class JudgementsSection(_Section):
    """Image judgements: pick activity in bins, check-zone presence, camera shift, picture."""

    bin_activity: BinActivitySection = BinActivitySection()
    presence: PresenceSection = PresenceSection()
    camera_shift: CameraShiftSection = CameraShiftSection()
    picture_quality: PictureQualitySection = PictureQualitySection()

    def to_settings(self) -> judgement_defaults.JudgementSettings:
        return judgement_defaults.JudgementSettings(
            bin_activity=judgement_defaults.BinActivitySettings(**self.bin_activity.model_dump()),
            presence=judgement_defaults.PresenceSettings(**self.presence.model_dump()),
            camera_shift=judgement_defaults.CameraShiftSettings(**self.camera_shift.model_dump()),
            picture_quality=_QUALITY(**self.picture_quality.model_dump()),
        )


def resolve_path(base_dir: Path, written: str) -> Path:
    """A path from a config made absolute from the config's folder (as the station does)."""
    candidate = Path(written).expanduser()
    if not candidate.is_absolute():
        candidate = base_dir / candidate
    return Path(os.path.normpath(candidate))


class StationConfig(_Section):
    """One station. Build it with :func:`stationcheck.config.load_config`, which also lints it."""

    format_version: Annotated[Whole, AfterValidator(_check_format_version)]
    station: StationSection
    camera: CameraSection
    model: ModelSection = ModelSection()
    thresholds: ThresholdsSection = ThresholdsSection()
    zones: list[ZoneEntry] = Field(min_length=1)
    steps: list[StepEntry] = Field(min_length=1)
    plc: PlcSection = PlcSection()
    log: LogSection = LogSection()
    plant: PlantSection | None = None
    judgements: JudgementsSection = JudgementsSection()

    _base_dir: Path = PrivateAttr(default_factory=Path.cwd)

    def with_base_dir(self, base_dir: Path) -> StationConfig:
        """The same config with relative paths resolved against ``base_dir``."""
        copy = self.model_copy()
        copy._base_dir = base_dir
        return copy

    def resolve(self, path: str) -> Path:
        """A path from the file, made absolute relative to the config file's folder."""
        return resolve_path(self._base_dir, path)

    @property
    def reference_frame_path(self) -> Path:
        return self.resolve(self.station.reference_frame)

    @property
    def camera_source(self) -> int | str | Path:
        """Camera index, stream URL (``scheme://...``), or a resolved video file path."""
        source = self.camera.source
        if isinstance(source, int) or "://" in source:
            return source
        return self.resolve(source)

    @property
    def model_path(self) -> Path | None:
        """The .onnx file to load, or None for the model bundled with the package."""
        return None if self.model.path == BUNDLED_MODEL else self.resolve(self.model.path)

    @property
    def log_path(self) -> Path:
        return self.resolve(self.log.path)

    @property
    def station_id(self) -> str | None:
        return self.plant.station_id if self.plant is not None else None

    def zone_specs(self) -> list[ZoneSpec]:
        """All zones with bolt circles written out, in file order."""
        return [spec for entry in self.zones for spec in entry.to_specs()]

    def to_plan(self) -> StationPlan:
        """The records the core runs on."""
        thresholds = Thresholds(
            min_score=self.model.min_score,
            dwell_ms=self.thresholds.dwell_ms,
            lost_track_grace_ms=self.thresholds.lost_track_grace_ms,
            hysteresis_px=self.thresholds.hysteresis_px,
            stale_frame_ms=self.thresholds.stale_frame_ms,
            max_run_ms=self.thresholds.max_run_ms,
        )
        steps: list[Step] = [step.to_step() for step in self.steps]
        return StationPlan(
            zones=tuple(self.zone_specs()),
            steps=tuple(steps),
            thresholds=thresholds,
            station=self.station.name,
            demo_data=self.station.demo_data,
        )
