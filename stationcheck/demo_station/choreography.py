"""Turns the scene script into what happens on every frame of the sample video (demo data).

The plan is: one operator track (tip, lift, tool turn), the still scene's state changes (parts
placed, screws driven, the pin), the parts carried in the hand, the camera's pose, and the
station inputs a video cannot show (unit started, tool running, tightening results,
acknowledgements), all on whole frames.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any, Literal

import numpy as np

from stationcheck.demo_station import layout
from stationcheck.demo_station.camera import CameraTransform
from stationcheck.demo_station.motion import Track, Waypoint
from stationcheck.demo_station.rig import OperatorRig, RigPose
from stationcheck.demo_station.script import (
    CameraNudge,
    LeaveView,
    Pause,
    Pick,
    SceneScript,
    Tighten,
    UnitScript,
    Visit,
)
from stationcheck.demo_station.shading import Point
from stationcheck.demo_station.station_scene import (
    ALL_LOOSE,
    PIN_TRAVEL_PX,
    PIN_X_PX,
    StationState,
)

Part = Literal["gasket", "cover"]
REST = Waypoint((578.0, 352.0), 30.0)
ELBOW_BASE_PX = (470.0, 650.0)
TOOL_TURN_RAD = -0.12
FADE_S = 0.4
NUDGE_S = 0.3
KNOB_PULLED_PX = (PIN_X_PX, layout.LOCKING_PIN_ZONE_PX[3] + 32.0 + PIN_TRAVEL_PX)


@dataclass(frozen=True)
class StationInput:
    frame: int
    kind: str
    data: dict[str, Any] = field(default_factory=dict)


@dataclass(frozen=True)
class StateChange:
    frame: int
    state: StationState
    fade_frames: int = 0


@dataclass(frozen=True)
class CarrySpan:
    start_frame: int
    end_frame: int
    part: Part


@dataclass(frozen=True)
class NudgeEvent:
    frame: int
    duration_frames: int
    target: CameraTransform


@dataclass(frozen=True)
class UnitSpan:
    serial: str
    rework: bool
    note: str
    start_frame: int
    end_frame: int


def rig_pose(w: Waypoint) -> RigPose:
    """Where the arm and tool are for a tip waypoint: the forearm comes from an elbow below the
    frame that follows the hand a little; the tool points along the forearm."""
    x, y = w.tip_px
    elbow = (ELBOW_BASE_PX[0] + 0.3 * (x - 320.0), ELBOW_BASE_PX[1] + 0.15 * (y - 215.0))
    angle = math.atan2(elbow[1] - y, elbow[0] - x) + TOOL_TURN_RAD + w.bias_rad
    return RigPose((x, y), angle, 1.0 + 0.0015 * w.lift_px, 0.95, w.lift_px, elbow)


@dataclass
class Choreography:
    fps: float
    frame_count: int
    track: Track
    inputs: list[StationInput]
    states: list[StateChange]
    carries: list[CarrySpan]
    nudges: list[NudgeEvent]
    units: list[UnitSpan]
    seed: int

    def pose(self, frame: int) -> RigPose:
        return rig_pose(self.track.sample(frame))

    def state(self, frame: int) -> tuple[StationState, StationState | None, float]:
        """(state, the state it fades from or None, how far the fade has come 0..1)."""
        current = self.states[0]
        previous: StateChange | None = None
        for change in self.states:
            if change.frame > frame:
                break
            previous, current = current, change
        if (
            previous is not None
            and current.fade_frames
            and frame < current.frame + current.fade_frames
        ):
            return (
                current.state,
                previous.state,
                (frame - current.frame + 1) / (current.fade_frames + 1),
            )
        return current.state, None, 1.0

    def carried(self, frame: int) -> Part | None:
        for span in self.carries:
            if span.start_frame <= frame < span.end_frame:
                return span.part
        return None

    def camera(self, frame: int) -> CameraTransform:
        dx = dy = rot = 0.0
        for nudge in self.nudges:
            if frame >= nudge.frame:
                u = (frame - nudge.frame) / max(1, nudge.duration_frames)
                k = 1.0 if u >= 1.0 else 1.0 - math.exp(-4.0 * u) * math.cos(3.0 * math.pi * u)
                dx, dy, rot = (
                    nudge.target.dx_px * k,
                    nudge.target.dy_px * k,
                    nudge.target.rot_deg * k,
                )
        t = frame / self.fps
        rng = np.random.default_rng(self.seed + 17)
        phases = rng.uniform(0, 2 * math.pi, 6)
        jx = 0.18 * math.sin(2 * math.pi * 0.7 * t + phases[0]) + 0.08 * math.sin(
            2 * math.pi * 2.3 * t + phases[1]
        )
        jy = 0.18 * math.sin(2 * math.pi * 0.5 * t + phases[2]) + 0.08 * math.sin(
            2 * math.pi * 1.9 * t + phases[3]
        )
        jr = 0.015 * math.sin(2 * math.pi * 0.4 * t + phases[4])
        return CameraTransform(round(dx + jx, 3), round(dy + jy, 3), round(rot + jr, 4))

    def unit_at(self, frame: int) -> UnitSpan | None:
        for unit in self.units:
            if unit.start_frame <= frame < unit.end_frame:
                return unit
        return None


class _Planner:
    def __init__(self, script: SceneScript, rig: OperatorRig, fps: float) -> None:
        self.script = script
        self.rig = rig
        self.rng = np.random.default_rng(script.seed)
        self.track = Track(REST, fps, script.seed)
        self.inputs: list[StationInput] = []
        self.states = [StateChange(0, StationState("empty", ALL_LOOSE, False))]
        self.carries: list[CarrySpan] = []
        self.nudges: list[NudgeEvent] = []
        self.units: list[UnitSpan] = []
        self.sequence = 0

    # --- helpers ---------------------------------------------------------------------
    def s(self, seconds: float) -> float:
        """A duration with a little human variation."""
        return seconds * float(self.rng.uniform(0.92, 1.08))

    def set_state(self, frame: int, fade_frames: int = 0, **changes: Any) -> None:
        state = replace(self.states[-1].state, **changes)
        self.states.append(StateChange(frame, state, fade_frames))

    def emit(self, frame: int, kind: str, **data: Any) -> None:
        self.inputs.append(StationInput(frame, kind, data))

    def tip_for_reach(self, target: Point, lift_px: float) -> Point:
        tip = target
        for _ in range(4):
            reach = self.rig.reach_point(rig_pose(Waypoint(tip, lift_px)))
            tip = (tip[0] + target[0] - reach[0], tip[1] + target[1] - reach[1])
        return tip

    def move_to(self, tip: Point, lift_px: float, hop_px: float = 14.0, bias: float = 0.0) -> int:
        dist = math.dist(self.track.last.tip_px, tip)
        seconds = self.s(0.24 + dist / 680.0) / self.script.knobs.operator_speed
        return self.track.move(Waypoint(tip, lift_px, bias), seconds, hop_px)

    # --- actions -----------------------------------------------------------------------
    def pick(self, pick: Pick) -> None:
        box = layout.LEFT_BIN_PX if pick.bin_zone == "bin_gasket" else layout.RIGHT_BIN_PX
        target = (
            (box[0] + box[2]) / 2 + float(self.rng.normal(0, 6)),
            (box[1] + box[3]) / 2 + 12.0 + float(self.rng.normal(0, 8)),
        )
        self.move_to(self.tip_for_reach(target, 12.0), 12.0, hop_px=20.0)
        end = self.track.hold(self.s(0.6))
        if not pick.take:
            return
        part: Part = "gasket" if pick.bin_zone == "bin_gasket" else "cover"
        self.move_to(self.tip_for_reach(layout.COVER_CENTRE_PX, 6.0), 6.0, hop_px=22.0)
        placed = self.track.hold(self.s(0.25))
        self.carries.append(CarrySpan(end, placed - 4, part))
        self.set_state(placed - 4, stage=part)

    def tighten(self, action: Tighten) -> None:
        self.go_to_screw(action.zone)
        self.track.hold(0.4)
        start = self.track.frame
        end = self.track.hold(self.s(0.5), kind="run")
        self.sequence += 1
        self.emit(start, "tool_running", on=True)
        self.emit(end, "tool_running", on=False)
        self.emit(
            end,
            "tightening_result",
            ok=action.ok,
            torque_nm=action.torque_nm,
            angle_deg=action.angle_deg,
            sequence=self.sequence,
            position=action.zone,
        )
        screws = list(self.states[-1].state.screws)
        screws[int(action.zone.split("_")[-1]) - 1] = "seated"
        self.set_state(end, screws=tuple(screws))
        self.track.hold(self.s(0.45 if not action.ok else 0.12))

    def go_to_screw(self, zone: str) -> None:
        number = int(zone.split("_")[-1])
        pos = layout.screw_positions()[number - 1]
        last = self.track.last.tip_px
        target = (
            pos.x_px + float(self.rng.normal(0, 1.0)),
            pos.y_px + float(self.rng.normal(0, 1.0)),
        )
        if math.dist(last, target) > 3.0:
            self.move_to(target, 0.0, hop_px=16.0)

    def visit(self, action: Visit) -> None:
        self.go_to_screw(action.zone)
        self.track.hold(action.wait_s)

    def leave_view(self, action: LeaveView) -> None:
        x = self.track.last.tip_px[0]
        self.track.move(
            Waypoint((x + 60.0, layout.FRAME_HEIGHT_PX + 330.0), 40.0), self.s(0.7), 0.0, False
        )
        self.track.hold(action.duration_s)

    def nudge(self, action: CameraNudge) -> None:
        target = CameraTransform(action.dx_px, action.dy_px, action.rot_deg)
        self.nudges.append(NudgeEvent(self.track.frame, self.track.frames(NUDGE_S), target))

    def push_pin(self) -> None:
        knob = self.tip_for_reach(KNOB_PULLED_PX, 8.0)
        self.move_to((knob[0], knob[1] + 6.0), 8.0, hop_px=12.0)
        self.track.hold(self.s(0.2))
        pushed = (knob[0], knob[1] - PIN_TRAVEL_PX)
        half = self.track.move(Waypoint(pushed, 8.0), 0.3, 0.0, False)
        self.set_state(half - 4, pin_engaged=True)
        self.track.hold(self.s(0.2))

    def rest(self, seconds: float) -> int:
        self.move_to(REST.tip_px, REST.lift_px, hop_px=10.0)
        return self.track.hold(seconds)

    # --- units ---------------------------------------------------------------------------
    def unit(self, unit: UnitScript, first: bool) -> None:
        start = self.track.frame
        if not unit.rework:
            fade = self.track.frames(FADE_S)
            if not first:
                self.set_state(
                    self.track.frame,
                    fade_frames=fade,
                    stage="empty",
                    screws=ALL_LOOSE,
                    pin_engaged=False,
                )
            self.track.hold_frames(fade + self.track.frames(0.1))
        else:
            self.track.hold(0.4)
        self.emit(self.track.frame, "unit_started", serial=unit.serial, rework=unit.rework)
        for pick in unit.picks:
            self.pick(pick)
        for action in unit.fasten:
            if isinstance(action, Tighten):
                self.tighten(action)
            elif isinstance(action, Visit):
                self.visit(action)
            elif isinstance(action, LeaveView):
                self.leave_view(action)
            elif isinstance(action, CameraNudge):
                self.nudge(action)
            elif isinstance(action, Pause):
                self.track.hold(action.duration_s)
        if unit.pin == "push":
            self.push_pin()
        if unit.pin != "none":
            self.rest(self.s(0.3))
        if unit.ack_after_s is not None:
            self.track.hold(unit.ack_after_s)
            self.emit(self.track.frame, "operator_ack")
            self.track.hold(0.3)
        self.units.append(UnitSpan(unit.serial, unit.rework, unit.note, start, self.track.frame))


def choreograph(script: SceneScript, rig: OperatorRig, fps: float = layout.FPS) -> Choreography:
    planner = _Planner(script, rig, fps)
    for i, unit in enumerate(script.units):
        planner.unit(unit, first=i == 0)
    end = planner.track.hold(script.tail_s)
    if planner.units:
        last = planner.units[-1]
        planner.units[-1] = replace(last, end_frame=end)
    return Choreography(
        fps,
        end,
        planner.track,
        planner.inputs,
        planner.states,
        planner.carries,
        planner.nudges,
        planner.units,
        script.seed,
    )
