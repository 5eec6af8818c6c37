"""The scene script: what the operator does on each unit of the sample video (demo data).

A small YAML file (see ``sample_video/demo_script.yaml`` and ``sample_video/README.md``)::

    format_version: 1
    seed: 7
    units:
      - serial: PC-000101
        picks: [bin_gasket, bin_cover]          # {reach: bin_cover} = reach in, take nothing
        fasten:
          - {tighten: screw_1, ok: true, torque_nm: 5.02, angle_deg: 28.1}
          - {visit: screw_2}                    # stop at a position, no run, move on
          - {leave_view_s: 1.6}                 # the tool leaves the camera's view
          - {camera_nudge: {dx_px: 10, dy_px: -7, rot_deg: 1.1}}
          - {pause_s: 0.5}
        pin: push                               # push | leave_out | keep | none
        ack_after_s: 1.5                        # operator acknowledges after this wait
    look: {gain: 0.45, cast_bgr: [0.78, 0.95, 1.12], vignette: 0.35, noise_sigma: 3,
           jpeg_quality: 40, blur_px: 0.8,
           light_from: [0.9, 0.1], light_falloff: 0.4}  # optional: a worse camera picture
    tool: {kind: pistol, body_bgr: [40, 40, 150]}   # optional: another station's tool,
    operator: {speed: 1.3, glove_bgr: [40, 40, 42]} # hands, pace, bench and camera
    bench: mat
    camera: {zoom: 1.15, tilt_deg: 8, rot_deg: 4, width_px: 800, height_px: 600, fps: 25}

The knobs besides ``look`` are described in ``scene_knobs.py``.

``rework: true`` starts a rework pass of a serial seen before (same part still in the fixture).
A tightening's ``ok`` must agree with the station config's torque and angle limits, as the
tightening controller's verdict would.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

from stationcheck.config import yaml_text
from stationcheck.demo_station.look import Look, look_from_mapping
from stationcheck.demo_station.scene_knobs import SceneKnobs, knobs_from_document
from stationcheck.errors import ConfigError, InputFileError

PinAction = Literal["push", "leave_out", "keep", "none"]
TOP_LEVEL_KEYS = (
    "format_version",
    "seed",
    "units",
    "tail_s",
    "look",
    "tool",
    "operator",
    "bench",
    "camera",
)
BIN_ZONES = ("bin_gasket", "bin_cover")


@dataclass(frozen=True)
class Pick:
    bin_zone: str
    take: bool = True  # False: reach in and take nothing (e.g. the wrong bin)


@dataclass(frozen=True)
class Tighten:
    zone: str
    ok: bool
    torque_nm: float
    angle_deg: float


@dataclass(frozen=True)
class Visit:
    """Stop at a position without running the tool."""

    zone: str
    wait_s: float = 0.8


@dataclass(frozen=True)
class LeaveView:
    duration_s: float


@dataclass(frozen=True)
class CameraNudge:
    dx_px: float
    dy_px: float
    rot_deg: float


@dataclass(frozen=True)
class Pause:
    duration_s: float


Action = Tighten | Visit | LeaveView | CameraNudge | Pause


@dataclass(frozen=True)
class UnitScript:
    serial: str
    rework: bool = False
    note: str = ""
    picks: tuple[Pick, ...] = ()
    fasten: tuple[Action, ...] = ()
    pin: PinAction = "push"
    ack_after_s: float | None = None


@dataclass(frozen=True)
class SceneScript:
    seed: int
    units: tuple[UnitScript, ...]
    tail_s: float = 1.0  # still frames after the last action
    look: Look = field(default_factory=Look)  # how the camera picture looks (light, noise, ...)
    knobs: SceneKnobs = field(default_factory=SceneKnobs)  # tool, operator, bench, camera
    source: str = field(default="", compare=False)


@dataclass(frozen=True)
class Limits:
    torque_nm: tuple[float, float]
    angle_deg: tuple[float, float]
    fastener_zones: tuple[str, ...]


def load_script(path: Path, limits: Limits) -> SceneScript:
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise InputFileError(f"cannot read scene script {path}: {exc}") from exc
    doc = yaml_text.load_plain(text, str(path))
    return parse_script(doc, limits, str(path))


def parse_script(doc: Any, limits: Limits, source: str = "<script>") -> SceneScript:
    """Validate a loaded document; every problem is reported at once with its location."""
    errors: list[str] = []
    if not isinstance(doc, dict):
        raise ConfigError(f"{source}: expected a mapping at the top level")
    if doc.get("format_version") != 1:
        errors.append(f"format_version: expected 1, got {doc.get('format_version')!r}")
    units_doc = doc.get("units")
    units: list[UnitScript] = []
    if not isinstance(units_doc, list) or not units_doc:
        errors.append("units: expected a non-empty list")
        units_doc = []
    seen: set[str] = set()
    for i, unit_doc in enumerate(units_doc):
        unit = _unit(unit_doc, f"units[{i}]", limits, errors)
        if unit is None:
            continue
        if unit.rework and unit.serial not in seen:
            errors.append(f"units[{i}].rework: serial {unit.serial} has no earlier pass")
        if not unit.rework and unit.serial in seen:
            errors.append(f"units[{i}].serial: {unit.serial} repeats; mark the pass rework: true")
        seen.add(unit.serial)
        units.append(unit)
    seed = doc.get("seed", 0)
    if not isinstance(seed, int):
        errors.append(f"seed: expected an integer, got {seed!r}")
        seed = 0
    tail = doc.get("tail_s", 1.0)
    if not isinstance(tail, (int, float)) or tail < 0:
        errors.append(f"tail_s: expected a number >= 0, got {tail!r}")
        tail = 1.0
    look = look_from_mapping(doc.get("look"), "look", errors)
    knobs = knobs_from_document(doc, errors)
    unknown = sorted(set(doc) - set(TOP_LEVEL_KEYS))
    if unknown:
        errors.append(f"unknown keys {unknown}; a script has {list(TOP_LEVEL_KEYS)}")
    if errors:
        raise ConfigError(f"{source}: " + "; ".join(errors))
    return SceneScript(seed, tuple(units), float(tail), look, knobs, source)


def _unit(doc: Any, where: str, limits: Limits, errors: list[str]) -> UnitScript | None:
    if not isinstance(doc, dict):
        errors.append(f"{where}: expected a mapping")
        return None
    serial = doc.get("serial")
    if not isinstance(serial, str) or not serial:
        errors.append(f"{where}.serial: expected a non-empty string")
        serial = "?"
    picks: list[Pick] = []
    for j, p in enumerate(doc.get("picks", []) or []):
        if isinstance(p, str) and p in BIN_ZONES:
            picks.append(Pick(p))
        elif isinstance(p, dict) and set(p) == {"reach"} and p["reach"] in BIN_ZONES:
            picks.append(Pick(p["reach"], take=False))
        else:
            errors.append(
                f"{where}.picks[{j}]: expected one of {BIN_ZONES} or {{reach: <bin>}}, got {p!r}"
            )
    actions: list[Action] = []
    for j, a in enumerate(doc.get("fasten", []) or []):
        action = _action(a, f"{where}.fasten[{j}]", limits, errors)
        if action is not None:
            actions.append(action)
    pin = doc.get("pin", "push")
    if pin not in ("push", "leave_out", "keep", "none"):
        errors.append(f"{where}.pin: expected push, leave_out, keep or none, got {pin!r}")
        pin = "none"
    ack = doc.get("ack_after_s")
    if ack is not None and (not isinstance(ack, (int, float)) or ack < 0):
        errors.append(f"{where}.ack_after_s: expected a number >= 0, got {ack!r}")
        ack = None
    unknown = set(doc) - {"serial", "rework", "note", "picks", "fasten", "pin", "ack_after_s"}
    if unknown:
        errors.append(f"{where}: unknown keys {sorted(unknown)}")
    return UnitScript(
        serial,
        bool(doc.get("rework", False)),
        str(doc.get("note", "")),
        tuple(picks),
        tuple(actions),
        pin,
        None if ack is None else float(ack),
    )


def _action(doc: Any, where: str, limits: Limits, errors: list[str]) -> Action | None:
    if not isinstance(doc, dict) or not doc:
        errors.append(f"{where}: expected a mapping")
        return None
    try:
        if "tighten" in doc:
            return _tighten(doc, where, limits, errors)
        if "visit" in doc:
            _zone(doc["visit"], f"{where}.visit", limits, errors)
            return Visit(str(doc["visit"]), float(doc.get("wait_s", 0.8)))
        if "leave_view_s" in doc:
            return LeaveView(float(doc["leave_view_s"]))
        if "camera_nudge" in doc:
            n = doc["camera_nudge"]
            return CameraNudge(float(n["dx_px"]), float(n["dy_px"]), float(n["rot_deg"]))
        if "pause_s" in doc:
            return Pause(float(doc["pause_s"]))
    except (KeyError, TypeError, ValueError) as exc:
        errors.append(f"{where}: {exc!r}")
        return None
    errors.append(f"{where}: expected tighten, visit, leave_view_s, camera_nudge or pause_s")
    return None


def _zone(zone: Any, where: str, limits: Limits, errors: list[str]) -> None:
    if zone not in limits.fastener_zones:
        errors.append(f"{where}: unknown fastener zone {zone!r}")


def _tighten(doc: dict[str, Any], where: str, limits: Limits, errors: list[str]) -> Tighten | None:
    _zone(doc["tighten"], f"{where}.tighten", limits, errors)
    torque, angle, ok = float(doc["torque_nm"]), float(doc["angle_deg"]), doc.get("ok")
    if not isinstance(ok, bool):
        errors.append(f"{where}.ok: expected true or false, got {ok!r}")
        return None
    within = (
        limits.torque_nm[0] <= torque <= limits.torque_nm[1]
        and limits.angle_deg[0] <= angle <= limits.angle_deg[1]
    )
    if within != ok:
        errors.append(
            f"{where}: ok={ok} disagrees with the limits (torque {torque} N·m in "
            f"{limits.torque_nm}, angle {angle} deg in {limits.angle_deg})"
        )
    return Tighten(str(doc["tighten"]), ok, torque, angle)
