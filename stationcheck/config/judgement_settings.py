"""Tunable values of the image judgements, with their defaults (the config's ``judgements:``).

Imports nothing heavy: the config schema takes its defaults from here.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from stationcheck.core.validation import require_at_least


def _require_fraction(record: str, name: str, value: float) -> None:
    require_at_least(record, name, value, 0.0)
    if value > 1.0:
        raise ValueError(f"{record}.{name} must be <= 1, got {value!r}")


@dataclass(frozen=True)
class BinActivitySettings:
    """``changed_fraction``: share of the bin zone that must differ from the learned empty bin;
    ``settle_ms``: how long the change must last before the bin counts as active;
    ``release_ms``: how long the zone must be calm again before it counts as inactive;
    ``tool_reach_px``: when the tool's tip is seen, a reach counts only with the tip this close
    to the bin (0: the free hand may pick, the tip's position is not used)."""

    changed_fraction: float = 0.05
    settle_ms: float = 50.0
    release_ms: float = 100.0
    tool_reach_px: float = 60.0

    def __post_init__(self) -> None:
        _require_fraction("BinActivitySettings", "changed_fraction", self.changed_fraction)
        require_at_least("BinActivitySettings", "settle_ms", self.settle_ms, 0.0)
        require_at_least("BinActivitySettings", "release_ms", self.release_ms, 0.0)
        require_at_least("BinActivitySettings", "tool_reach_px", self.tool_reach_px, 0.0)


@dataclass(frozen=True)
class PresenceSettings:
    """``min_match``: normalised cross-correlation with the winning class needed for a verdict;
    ``min_margin``: how far the winning class must lead the other; ``confirm_ms``: how long a
    verdict must hold before it is reported; ``search_px``: how far the zone's content may sit
    from where it was taught."""

    min_match: float = 0.7
    min_margin: float = 0.3
    confirm_ms: float = 100.0
    search_px: int = 3

    def __post_init__(self) -> None:
        _require_fraction("PresenceSettings", "min_match", self.min_match)
        require_at_least("PresenceSettings", "min_margin", self.min_margin, 0.0)
        require_at_least("PresenceSettings", "confirm_ms", self.confirm_ms, 0.0)
        require_at_least("PresenceSettings", "search_px", self.search_px, 0)


@dataclass(frozen=True)
class CameraShiftSettings:
    """``tolerance_px``: largest allowed displacement of any zone corner from the reference view;
    ``interval_ms``: time between two checks; ``confirm_checks``: checks in a row that must agree
    before the state changes."""

    tolerance_px: float = 4.0
    interval_ms: float = 200.0
    confirm_checks: int = 2

    def __post_init__(self) -> None:
        require_at_least("CameraShiftSettings", "tolerance_px", self.tolerance_px, 0.5)
        require_at_least("CameraShiftSettings", "interval_ms", self.interval_ms, 0.0)
        require_at_least("CameraShiftSettings", "confirm_checks", self.confirm_checks, 1)


@dataclass(frozen=True)
class PictureQualitySettings:
    """Below ``min_brightness`` (mean grey level), ``min_contrast`` (grey standard deviation) or
    above ``max_noise_sigma`` (grey levels) the camera's position cannot be checked and nothing
    is judged; below ``min_sharpness`` (variance of the Laplacian at half size) or above
    ``max_blockiness`` (JPEG block-border step ratio) bins and check zones are not judged."""

    min_brightness: float = 20.0
    min_contrast: float = 8.0
    max_noise_sigma: float = 12.0
    min_sharpness: float = 4.0
    max_blockiness: float = 8.0

    def __post_init__(self) -> None:
        for name in ("min_brightness", "min_contrast", "max_noise_sigma", "min_sharpness"):
            require_at_least("PictureQualitySettings", name, getattr(self, name), 0.0)
        require_at_least("PictureQualitySettings", "max_blockiness", self.max_blockiness, 1.0)


@dataclass(frozen=True)
class JudgementSettings:
    bin_activity: BinActivitySettings = field(default_factory=BinActivitySettings)
    presence: PresenceSettings = field(default_factory=PresenceSettings)
    camera_shift: CameraShiftSettings = field(default_factory=CameraShiftSettings)
    picture_quality: PictureQualitySettings = field(default_factory=PictureQualitySettings)
