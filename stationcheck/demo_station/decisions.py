"""The decisions the station should make on the sample video, derived from the ground truth
and the station inputs with a few written-down rules (``sample_video/README.md``), not from
any detector. A later sequencer is compared with these within a small frame tolerance.

All durations are counted in frames: a condition that must hold for ``D`` ms holds from its
first frame ``f0`` and is met at the first frame ``f`` with ``(f - f0) / fps >= D / 1000``.
Inputs stamped with frame ``f`` are applied before frame ``f``'s observation.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from typing import Any

from stationcheck.core.plan import (
    CheckStep,
    ConfirmStep,
    FastenStep,
    PickStep,
    StationPlan,
    Step,
)
from stationcheck.core.tracker import at_picture_edge
from stationcheck.demo_station import layout
from stationcheck.demo_station.camera import CameraTransform
from stationcheck.demo_station.choreography import StationInput
from stationcheck.demo_station.ground_truth import zone_of
from stationcheck.errors import ConfigError
from stationcheck.pipeline.truth_rows import TruthRow, distance_to_polygon_edge, point_in_polygon

CAMERA_MOVED_PX = 3.0  # a frame corner moved this far from the reference -> camera moved
BIN_FLAGS = {"bin_gasket": "hand_in_bin_gasket", "bin_cover": "hand_in_bin_cover"}


@dataclass
class _Unit:
    serial: str
    rework: bool
    steps: list[Step]
    positions: list[str]  # fastener zones still to do in the fasten step
    step_index: int = 0
    step_start: int = 0
    attempts: dict[str, int] = field(default_factory=dict)
    failed: list[str] = field(default_factory=list)

    @property
    def step(self) -> Step | None:
        return self.steps[self.step_index] if self.step_index < len(self.steps) else None


class ReferenceSequencer:
    """Replays ground truth and inputs frame by frame and records the expected decisions."""

    def __init__(
        self,
        plan: StationPlan,
        fps: float,
        picture_size: tuple[int, int] = (layout.FRAME_WIDTH_PX, layout.FRAME_HEIGHT_PX),
    ) -> None:
        self.plan = plan
        self.fps = fps
        self.picture_size = picture_size  # (width, height): the station's edge band lies in it
        t = plan.thresholds
        self.dwell_frames = self._frames(t.dwell_ms)
        self.grace_frames = self._frames(t.lost_track_grace_ms)
        self.hysteresis_px = t.hysteresis_px
        self.out: list[dict[str, Any]] = []
        self.unit: _Unit | None = None
        self.rework_due: dict[str, list[str]] = {}
        self.zone = ""
        self.zone_entry = 0
        self.last_seen = 0
        self.lost = False
        self.lost_alarmed = False
        self.seen_once = False
        self.enabled = False
        self.enabled_zone = ""
        self.running = False
        self.last_result = -(10**9)
        self.result_zone = ""  # the position a result came in on, until the tip leaves it
        self.alarmed_visit: tuple[str, int] | None = None
        self.bin_since: dict[str, int | None] = {b: None for b in BIN_FLAGS}
        self.picked_bin = ""  # the bin just picked from, until activity there ends
        self.camera_moved = False
        self.frame = 0

    def _frames(self, ms: float) -> int:
        return math.ceil(ms * self.fps / 1000.0 - 1e-9)

    def emit(self, kind: str, **data: Any) -> None:
        serial = self.unit.serial if self.unit else None
        self.out.append(
            {
                "frame": self.frame,
                "t_s": round(self.frame / self.fps, 6),
                "kind": kind,
                "serial": serial,
                **data,
            }
        )

    # --- inputs ----------------------------------------------------------------------------
    def apply_input(self, item: StationInput) -> None:
        handler = getattr(self, f"_on_{item.kind}", None)
        if handler is None:
            raise ConfigError(f"frame {item.frame}: unknown station input {item.kind!r}")
        handler(item)

    def _on_unit_started(self, item: StationInput) -> None:
        if self.unit is not None:
            self._close("not_released", "next unit started")
        serial, rework = item.data["serial"], bool(item.data.get("rework", False))
        steps: list[Step] = []
        positions: list[str] = []
        for step in self.plan.steps:
            if rework and not STEP_DECISIONS[step.kind].kept_on_rework:
                continue
            if isinstance(step, FastenStep):
                due = self.rework_due.pop(serial, []) if rework else list(step.zones)
                positions = [z for z in step.zones if z in due]
                if not positions:
                    continue
            steps.append(step)
        self.unit = _Unit(serial, rework, steps, positions, step_start=self.frame)

    def _on_tool_running(self, item: StationInput) -> None:
        if item.data["on"] and not self.enabled:
            raise ConfigError(
                f"frame {item.frame}: the scene script runs the tool where the station would "
                "inhibit it (not enabled)"
            )
        self.running = bool(item.data["on"])

    def _on_tightening_result(self, item: StationInput) -> None:
        unit = self.unit
        if unit is None or not isinstance(unit.step, FastenStep):
            raise ConfigError(f"frame {item.frame}: a tightening result outside a fasten step")
        step = unit.step
        zone = unit.positions[0]
        attempt = unit.attempts.get(zone, 0) + 1
        unit.attempts[zone] = attempt
        ok = bool(item.data["ok"])
        self.emit(
            "position_result",
            step=step.id,
            zone=zone,
            attempt=attempt,
            ok=ok,
            torque_nm=item.data["torque_nm"],
            angle_deg=item.data["angle_deg"],
            sequence=item.data["sequence"],
        )
        self._enable(False, "result")
        self.last_result = self.frame
        self.result_zone = self.zone
        if ok or attempt >= step.max_attempts:
            if not ok:
                unit.failed.append(zone)
                self.rework_due.setdefault(unit.serial, []).append(zone)
                self.emit("rework_mark", step=step.id, zone=zone)
            unit.positions.pop(0)
            if not unit.positions or (not ok and step.on_failure == "stop_unit"):
                self.emit("step_done", step=step.id, failed=list(unit.failed))
                self._advance()

    def _on_operator_ack(self, item: StationInput) -> None:
        unit = self.unit
        if unit is not None and unit.step is not None:
            STEP_DECISIONS[unit.step.kind].on_ack(self, unit, unit.step)

    # --- observation ---------------------------------------------------------------------
    def observe(self, row: TruthRow) -> None:
        if self.camera_moved:
            return
        if _corner_shift_px(row) > CAMERA_MOVED_PX:
            self.camera_moved = True
            self.emit(
                "alarm",
                alarm="camera_moved",
                dx_px=row.cam_dx_px,
                dy_px=row.cam_dy_px,
                rot_deg=row.cam_rot_deg,
            )
            self._enable(False, "camera_moved")
            return
        self._track_zone(row)
        unit = self.unit
        if unit is None:
            return
        if unit.step is not None:
            STEP_DECISIONS[unit.step.kind].observe(self, unit, unit.step, row)
        self._alarm_if_lost()

    def _alarm_if_lost(self) -> None:
        """As the station: out of view is an alarm only while a fastener is due (picking a
        part or acknowledging a check may take the tool out of the picture), once per loss,
        after the frame's step decisions."""
        if self.lost and self.seen_once and not self.lost_alarmed and self._fastening():
            self.lost_alarmed = True
            self.emit("alarm", alarm="tool_lost", last_seen_frame=self.last_seen)

    def _track_zone(self, row: TruthRow) -> None:
        point = (row.tip_ref_x_px, row.tip_ref_y_px)
        new = self.zone
        if row.tip_v == 2 and not at_picture_edge(row.tip_x_px, row.tip_y_px, self.picture_size):
            self.last_seen = self.frame
            self.lost = False
            if not self.zone or not self._holds(self.zone, point):
                new = zone_of(point, self.plan.zones)
            self.seen_once = True
            self.lost_alarmed = False
        elif not self.lost and self.frame - self.last_seen > self.grace_frames:
            self.lost = True
            new = ""
        if new != self.zone:
            self.zone, self.zone_entry = new, self.frame
            if self.result_zone and new != self.result_zone:
                self.result_zone = ""

    def _fastening(self) -> bool:
        unit = self.unit
        return unit is not None and unit.step is not None and unit.step.kind == "fasten"

    def _holds(self, zone_id: str, point: tuple[float, float]) -> bool:
        polygon = self.plan.zone(zone_id).polygon_px
        return (
            point_in_polygon(point, polygon)
            or distance_to_polygon_edge(point, polygon) <= self.hysteresis_px
        )

    # --- per step kind (STEP_DECISIONS) --------------------------------------------------
    def _pick(self, unit: _Unit, step: PickStep, row: TruthRow) -> None:
        need = self._frames(step.min_time_ms)
        for bin_zone, flag in BIN_FLAGS.items():
            active = self.zone == bin_zone or bool(getattr(row, flag))
            if not active:
                self.bin_since[bin_zone] = None
                if self.picked_bin == bin_zone:
                    self.picked_bin = ""
                continue
            if self.bin_since[bin_zone] is None:
                self.bin_since[bin_zone] = self.frame
            since = max(self.bin_since[bin_zone] or 0, unit.step_start)
            if self.frame - since < need or bin_zone == self.picked_bin:
                continue
            if bin_zone == step.zone:
                self.emit("step_done", step=step.id, zone=bin_zone)
                self.picked_bin = bin_zone
                self._advance()
                return
            self.emit("alarm", alarm="wrong_bin", zone=bin_zone, expected=step.zone)
            self.picked_bin = bin_zone  # one alarm per stay in that bin

    def _check(self, unit: _Unit, step: CheckStep, row: TruthRow) -> None:
        if row.pin_engaged and row.pin_zone_clear:
            self.emit("check_result", step=step.id, zone=step.zone, passed=True)
            self._advance()

    def _fail_check(self, unit: _Unit, step: CheckStep) -> None:
        self.emit("check_result", step=step.id, zone=step.zone, passed=False)
        self.emit("alarm", alarm="check_failed", step=step.id, zone=step.zone)
        self._close("not_released", f"check {step.id} failed")

    def _confirm(self, unit: _Unit, step: ConfirmStep) -> None:
        self.emit("step_done", step=step.id)
        self._advance()

    def _nothing(self, unit: _Unit, step: Step, row: TruthRow | None = None) -> None:
        return None

    def _fasten(self, unit: _Unit, step: FastenStep, row: TruthRow | None = None) -> None:
        target = unit.positions[0]
        since = max(self.zone_entry, self.last_result)
        dwelled = self.frame - since >= self.dwell_frames
        if self.zone == target:
            if not self.enabled and dwelled:
                self._enable(True, "dwell", target)
        elif self.enabled and not self.running:
            self._enable(False, "tool_lost" if self.lost else "left_zone")
        zone = self.plan.zone(self.zone) if self.zone else None
        if (
            zone is not None
            and zone.kind == "fastener"
            and self.zone != target
            and dwelled
            and self.zone != self.result_zone
            and self.alarmed_visit != (self.zone, self.zone_entry)
        ):
            self.alarmed_visit = (self.zone, self.zone_entry)
            self.emit("alarm", alarm="wrong_position", zone=self.zone, expected=target)

    # --- helpers ---------------------------------------------------------------------------
    def _enable(self, on: bool, reason: str, zone: str = "") -> None:
        if on == self.enabled:
            return
        self.enabled = on
        if on:
            self.enabled_zone = zone
            self.emit("enable", on=True, zone=zone)
        else:
            self.emit("enable", on=False, zone=self.enabled_zone, reason=reason)
            self.enabled_zone = ""

    def _advance(self) -> None:
        unit = self.unit
        assert unit is not None
        unit.step_index += 1
        unit.step_start = self.frame
        if unit.step is None:
            if unit.failed:
                self._close("NOK", "positions left for rework")
            else:
                self._close("OK", "")

    def _close(self, result: str, reason: str) -> None:
        unit = self.unit
        assert unit is not None
        self._enable(False, "unit_ended")
        self.emit(
            "unit_result",
            rework=unit.rework,
            result=result,
            failed=list(unit.failed),
            reason=reason,
        )
        self.unit = None
        self.picked_bin = ""

    def finish(self) -> None:
        if self.unit is not None:
            self._close("not_released", "camera moved" if self.camera_moved else "end of recording")


@dataclass(frozen=True)
class StepRule:
    """How the reference decides a step of one kind (``sample_video/README.md``, the rules)."""

    observe: Callable[..., None]  # (sequencer, unit, step, truth row) on every frame
    on_ack: Callable[..., None]  # (sequencer, unit, step) on an operator acknowledge
    kept_on_rework: bool  # a rework pass keeps the step (a fasten step: its marked positions)


# step kind (core.step_kinds.STEP_KINDS) -> its reference rule
STEP_DECISIONS: dict[str, StepRule] = {
    "fasten": StepRule(ReferenceSequencer._fasten, ReferenceSequencer._nothing, True),
    "pick": StepRule(ReferenceSequencer._pick, ReferenceSequencer._nothing, False),
    "check": StepRule(ReferenceSequencer._check, ReferenceSequencer._fail_check, True),
    "confirm": StepRule(ReferenceSequencer._nothing, ReferenceSequencer._confirm, False),
}


def _corner_shift_px(row: TruthRow) -> float:
    camera = CameraTransform(row.cam_dx_px, row.cam_dy_px, row.cam_rot_deg)
    w, h = layout.FRAME_WIDTH_PX, layout.FRAME_HEIGHT_PX
    corners = ((0.0, 0.0), (w - 1.0, 0.0), (0.0, h - 1.0), (w - 1.0, h - 1.0))
    return max(math.dist(c, camera.apply(c, w, h)) for c in corners)


def expected_decisions(
    plan: StationPlan,
    rows: Sequence[TruthRow],
    inputs: Sequence[StationInput],
    fps: float,
    picture_size: tuple[int, int] = (layout.FRAME_WIDTH_PX, layout.FRAME_HEIGHT_PX),
) -> list[dict[str, Any]]:
    seq = ReferenceSequencer(plan, fps, picture_size)
    by_frame: dict[int, list[StationInput]] = {}
    for item in inputs:
        by_frame.setdefault(item.frame, []).append(item)
    for row in rows:
        seq.frame = row.frame_index
        for item in by_frame.get(row.frame_index, []):
            if not seq.camera_moved:
                seq.apply_input(item)
        seq.observe(row)
    seq.frame = rows[-1].frame_index if rows else 0
    seq.finish()
    return seq.out
