"""The scene script's renderer knobs besides the look: the tool, the operator's hands and pace,
the bench, and the camera's mounting, frame size and rate (demo data).

::

    tool: {kind: pistol, length_px: 150, radius_px: 19, body_bgr: [40, 40, 150],
           accent_bgr: [200, 200, 200], has_cable: false}
    operator: {speed: 1.3, glove_bgr: [40, 40, 42], sleeve_bgr: [60, 60, 62]}
    bench: mat                                    # wood | mat | steel | painted | laminate
    camera: {zoom: 1.15, tilt_deg: 8, rot_deg: 4, width_px: 800, height_px: 600, fps: 25}

Every knob is optional; each problem is reported with its place (``tool.kind: ...``).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, fields
from typing import Any, TypeVar

from stationcheck.demo_station.arm_sprite import DEMO_ARM, ArmStyle
from stationcheck.demo_station.camera import View
from stationcheck.demo_station.textures import BENCH_KINDS, BenchKind
from stationcheck.demo_station.tool_sprite import DEMO_TOOL, ToolStyle

T = TypeVar("T")
TOOL_KNOBS = (
    "kind",
    "length_px",
    "radius_px",
    "bit_length_px",
    "body_bgr",
    "accent_bgr",
    "grip_bgr",
    "cap_bgr",
    "cable_bgr",
    "cable_bend",
    "has_cable",
    "pack_bgr",
)
ARM_KNOBS = ("skin_bgr", "sleeve_bgr", "glove_bgr", "sleeve_start_px", "hand_scale")
VIEW_KNOBS = tuple(f.name for f in fields(View))
FPS_RANGE = (5.0, 120.0)
SPEED_RANGE = (0.3, 3.0)


@dataclass(frozen=True)
class SceneKnobs:
    """``operator_speed`` scales how fast the operator moves between places (1 = as scripted;
    dwell, runs and pauses keep their durations); ``fps`` is the camera's frame rate."""

    tool: ToolStyle = DEMO_TOOL
    arm: ArmStyle = DEMO_ARM
    operator_speed: float = 1.0
    bench: BenchKind = "wood"
    view: View = field(default_factory=View)
    fps: float = 30.0


def _colour_lists_to_tuples(values: dict[str, Any]) -> dict[str, Any]:
    return {
        k: tuple(float(c) for c in v) if k.endswith("_bgr") and isinstance(v, list) else v
        for k, v in values.items()
    }


def _check_colours(values: Mapping[str, Any], where: str, errors: list[str]) -> bool:
    good = True
    for key, value in values.items():
        if (
            key.endswith("_bgr")
            and value is not None
            and not (
                isinstance(value, tuple)
                and len(value) == 3
                and all(isinstance(c, float) and 0.0 <= c <= 255.0 for c in value)
            )
        ):
            errors.append(f"{where}.{key}: expected three numbers in [0, 255], got {value!r}")
            good = False
    return good


def _build(
    cls: type[T], allowed: tuple[str, ...], doc: Mapping[str, Any], where: str, errors: list[str]
) -> T | None:
    unknown = sorted(set(doc) - set(allowed))
    if unknown:
        errors.append(f"{where}: unknown keys {unknown}; knobs are {sorted(allowed)}")
        return None
    try:
        values = _colour_lists_to_tuples(dict(doc))
    except (TypeError, ValueError):
        errors.append(f"{where}: colours are lists of three numbers")
        return None
    if not _check_colours(values, where, errors):
        return None
    try:
        return cls(**values)
    except (TypeError, ValueError) as exc:
        errors.append(f"{where}: {exc}")
        return None


def _mapping(doc: Any, where: str, errors: list[str]) -> Mapping[str, Any] | None:
    if doc is None:
        return None
    if not isinstance(doc, Mapping):
        errors.append(f"{where}: expected a mapping")
        return None
    return doc


def _number(value: Any, where: str, bounds: tuple[float, float], errors: list[str]) -> float:
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        errors.append(f"{where}: expected a number, got {value!r}")
        return 1.0
    if not bounds[0] <= value <= bounds[1]:
        errors.append(f"{where}: must be in [{bounds[0]:g}, {bounds[1]:g}], got {value!r}")
    return float(value)


def knobs_from_document(doc: Mapping[str, Any], errors: list[str]) -> SceneKnobs:
    """The knobs of a script's top-level mapping; problems go to ``errors``."""
    knobs = SceneKnobs()
    tool_doc = _mapping(doc.get("tool"), "tool", errors)
    tool = _build(ToolStyle, TOOL_KNOBS, tool_doc, "tool", errors) if tool_doc else None
    arm, speed = DEMO_ARM, 1.0
    operator = _mapping(doc.get("operator"), "operator", errors)
    if operator:
        speed_value = operator.get("speed", 1.0)
        speed = _number(speed_value, "operator.speed", SPEED_RANGE, errors)
        hand = {k: v for k, v in operator.items() if k != "speed"}
        built = _build(ArmStyle, ARM_KNOBS + ("speed",), hand, "operator", errors)
        arm = built or DEMO_ARM
    bench = doc.get("bench", "wood")
    if bench not in BENCH_KINDS:
        errors.append(f"bench: expected one of {list(BENCH_KINDS)}, got {bench!r}")
        bench = "wood"
    view, fps = View(), knobs.fps
    camera = _mapping(doc.get("camera"), "camera", errors)
    if camera:
        fps = _number(camera.get("fps", knobs.fps), "camera.fps", FPS_RANGE, errors)
        frame = {k: v for k, v in camera.items() if k != "fps"}
        view = _build(View, VIEW_KNOBS + ("fps",), frame, "camera", errors) or View()
    return SceneKnobs(tool or DEMO_TOOL, arm, speed, bench, view, fps)
