"""The operator's arm holding the tool: one pose in, sprites placed with shadows and blur out.

A :class:`RigPose` says where the bit tip is (frame pixels), where the tool points (tip -> rear),
how big it looks (closer to the camera when lifted) and where the elbow is (below the frame).
The rig turns it into affines for the forearm, wrist, tool and fist, in that drawing order.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass, replace

import cv2
import numpy as np

from stationcheck.demo_station import compositor as comp
from stationcheck.demo_station.arm_sprite import (
    DEMO_ARM,
    ArmStyle,
    make_fist_sprites,
    make_forearm_sprite,
)
from stationcheck.demo_station.shading import LIGHT_DIR, FloatImage, Point, Sprite, as_u8
from stationcheck.demo_station.tool_sprite import DEMO_TOOL, ToolStyle, make_tool_sprite

U8Image = comp.U8Image

SHADOW_PER_HEIGHT = (
    float(-LIGHT_DIR[0] / LIGHT_DIR[2]) * 0.35,
    float(-LIGHT_DIR[1] / LIGHT_DIR[2]) * 0.35,
)
REAR_HEIGHT_PX = 95.0
HAND_HEIGHT_PX = 60.0
FOREARM_HEIGHT_PX = 75.0


@dataclass(frozen=True)
class RigPose:
    tip_px: Point
    angle_rad: float  # direction tip -> rear in the frame
    scale: float = 1.0
    foreshorten: float = 1.0  # extra squash of the tool along its axis (tilt)
    lift_px: float = 0.0  # tip height above the surface (shadow offset)
    elbow_px: Point = (470.0, 640.0)
    show_arm: bool = True
    show_tool: bool = True


@dataclass(frozen=True)
class PlacedRig:
    tool: comp.Affine
    wrist: comp.Affine
    fist: comp.Affine
    forearm: comp.Affine

    @functools.cached_property
    def inverse(self) -> dict[str, comp.Affine]:
        """Frame -> sprite affines, for looking up coverage at single points."""
        return {
            "tool": comp.invert(self.tool),
            "wrist": comp.invert(self.wrist),
            "fist": comp.invert(self.fist),
            "forearm": comp.invert(self.forearm),
        }


@dataclass(frozen=True)
class RigLayers:
    """What one drawn frame covered: alpha of the tool alone and of the fist over it."""

    tool_region: comp.Region
    tool_alpha: FloatImage | None
    fist_region: comp.Region
    fist_alpha: FloatImage | None


@dataclass(frozen=True)
class SoftShadow:
    """A sprite's alpha blurred on a padded canvas; ``pad_px`` maps it back onto the sprite."""

    alpha: U8Image
    pad_px: int

    @classmethod
    def of(cls, sprite: Sprite, sigma_px: float) -> SoftShadow:
        pad = int(3 * sigma_px) + 1
        padded = cv2.copyMakeBorder(
            sprite.bgra[..., 3], pad, pad, pad, pad, cv2.BORDER_CONSTANT, value=0
        )
        return cls(as_u8(cv2.GaussianBlur(padded, (0, 0), sigma_px)), pad)

    def affine(self, m: comp.Affine) -> comp.Affine:
        shift = np.asarray([[1.0, 0.0, -self.pad_px], [0.0, 1.0, -self.pad_px]])
        return comp.compose(m, shift)


class OperatorRig:
    """Sprites of one tool and one arm, drawn at any pose."""

    def __init__(
        self, tool_style: ToolStyle = DEMO_TOOL, arm_style: ArmStyle = DEMO_ARM, seed: int = 7
    ) -> None:
        self.tool = make_tool_sprite(tool_style)
        self.wrist, self.fist = make_fist_sprites(
            _local(self.tool, "grip"), tool_style.radius_px, arm_style, seed
        )
        self.forearm = make_forearm_sprite(arm_style, seed + 1)
        self._tool_alpha = self.tool.alpha
        self._fist_alpha = self.fist.alpha
        self._wrist_alpha = self.wrist.alpha
        self._forearm_alpha = self.forearm.alpha
        self._soft_tool = SoftShadow.of(self.tool, 2.5)
        self._soft_fist = SoftShadow.of(self.fist, 5.0)
        self._soft_wrist = SoftShadow.of(self.wrist, 5.0)
        self._soft_forearm = SoftShadow.of(self.forearm, 8.0)

    def place(self, pose: RigPose) -> PlacedRig:
        sx = pose.scale * pose.foreshorten
        tool = comp.pose_affine(
            self.tool.points["tip"], pose.tip_px, pose.angle_rad, sx, pose.scale
        )
        grip_frame = comp.apply(tool, self.tool.points["grip"])
        fist, wrist = (
            comp.pose_affine(
                _hand_point(hand, self.tool, "grip"),
                grip_frame,
                pose.angle_rad,
                pose.scale,
                pose.scale,
            )
            for hand in (self.fist, self.wrist)
        )
        wrist_frame = comp.apply(wrist, self.wrist.points["wrist"])
        ex, ey = pose.elbow_px
        forearm_angle = math.atan2(ey - wrist_frame[1], ex - wrist_frame[0])
        forearm = comp.pose_affine(
            self.forearm.points["wrist"], wrist_frame, forearm_angle, pose.scale, pose.scale
        )
        return PlacedRig(tool, wrist, fist, forearm)

    def keypoints(self, pose: RigPose) -> tuple[Point, Point]:
        m = self.place(pose).tool
        return comp.apply(m, self.tool.points["tip"]), comp.apply(m, self.tool.points["rear"])

    def reach_point(self, pose: RigPose) -> Point:
        """Frame point just ahead of the fingers: what reaches into a bin."""
        return comp.apply(self.place(pose).fist, self.fist.points["reach"])

    def occluder_alpha_at(self, pose: RigPose, point: Point) -> float:
        """Coverage of the fist over a frame point (the only part drawn over the tool)."""
        if not pose.show_arm:
            return 0.0
        return comp.alpha_at(self._fist_alpha, self.place(pose).fist, point)

    def arm_alpha_at(self, pose: RigPose, point: Point) -> float:
        """Coverage of fist, wrist or forearm over a frame point."""
        if not pose.show_arm:
            return 0.0
        placed = self.place(pose)
        return max(
            comp.alpha_at(self._fist_alpha, placed.fist, point),
            comp.alpha_at(self._wrist_alpha, placed.wrist, point),
            comp.alpha_at(self._forearm_alpha, placed.forearm, point),
        )

    def coverage_at(
        self, pose: RigPose, placed: PlacedRig, point: Point
    ) -> tuple[float, float, float]:
        """(tool, fist over the tool, whole arm) coverage at a frame point for a placed pose."""
        inv = placed.inverse
        tool = (
            comp.alpha_at_inverse(self._tool_alpha, inv["tool"], point) if pose.show_tool else 0.0
        )
        if not pose.show_arm:
            return tool, 0.0, 0.0
        fist = comp.alpha_at_inverse(self._fist_alpha, inv["fist"], point)
        arm = max(
            fist,
            comp.alpha_at_inverse(self._wrist_alpha, inv["wrist"], point),
            comp.alpha_at_inverse(self._forearm_alpha, inv["forearm"], point),
        )
        return tool, fist, arm

    def keypoints_placed(self, placed: PlacedRig) -> tuple[Point, Point]:
        return (
            comp.apply(placed.tool, self.tool.points["tip"]),
            comp.apply(placed.tool, self.tool.points["rear"]),
        )

    def reach_placed(self, placed: PlacedRig) -> Point:
        return comp.apply(placed.fist, self.fist.points["reach"])

    def tool_alpha_at(self, pose: RigPose, point: Point) -> float:
        if not pose.show_tool:
            return 0.0
        return comp.alpha_at(self._tool_alpha, self.place(pose).tool, point)

    def draw_shadows(self, frame: U8Image, pose: RigPose, strength: float) -> None:
        placed = self.place(pose)
        if pose.show_arm:
            for soft, m, height in (
                (self._soft_forearm, placed.forearm, FOREARM_HEIGHT_PX),
                (self._soft_wrist, placed.wrist, HAND_HEIGHT_PX),
                (self._soft_fist, placed.fist, HAND_HEIGHT_PX),
            ):
                comp.darken(
                    frame, soft.alpha, [soft.affine(_shifted(m, pose.lift_px + height))], strength
                )
        if pose.show_tool:
            tip = self.tool.points["tip"]
            rear = self.tool.points["rear"]
            side = (tip[0], tip[1] + 20.0)
            src = np.asarray([tip, rear, side], np.float32)
            dst = np.asarray(
                [
                    _offset(comp.apply(placed.tool, tip), pose.lift_px),
                    _offset(comp.apply(placed.tool, rear), pose.lift_px + REAR_HEIGHT_PX),
                    _offset(comp.apply(placed.tool, side), pose.lift_px),
                ],
                np.float32,
            )
            m = np.asarray(cv2.getAffineTransform(src, dst), np.float64)
            comp.darken(frame, self._soft_tool.alpha, [self._soft_tool.affine(m)], strength)

    def coverage(self, pose: RigPose, shape: tuple[int, int]) -> tuple[FloatImage, FloatImage]:
        """Full-frame alpha of (the tool, the arm parts drawn over the tool) at a still pose."""
        placed = self.place(pose)
        tool = np.zeros(shape, np.float32)
        over = np.zeros(shape, np.float32)
        if pose.show_tool:
            _paint_alpha(tool, self.tool, placed.tool)
        if pose.show_arm:
            _paint_alpha(over, self.fist, placed.fist)
        return tool, over

    def arm_coverage(self, pose: RigPose, shape: tuple[int, int]) -> FloatImage:
        """Full-frame alpha of the whole arm (forearm, wrist and fist)."""
        placed = self.place(pose)
        out = np.zeros(shape, np.float32)
        if pose.show_arm:
            for sprite, m in (
                (self.forearm, placed.forearm),
                (self.wrist, placed.wrist),
                (self.fist, placed.fist),
            ):
                _paint_alpha(out, sprite, m)
        return out

    def draw_on(
        self, frame: U8Image, pose: RigPose, previous: RigPose | None, shadow: float
    ) -> RigLayers:
        """Shadows, then arm and tool."""
        self.draw_shadows(frame, pose, shadow)
        return self.draw(frame, pose, previous)

    def draw(self, frame: U8Image, pose: RigPose, previous: RigPose | None = None) -> RigLayers:
        """Draw arm and tool over ``frame`` (uint8 BGR, in place), blurred along the motion
        since ``previous``. Returns the coverage layers (for masks and tests)."""
        now = self.place(pose)
        before = self.place(previous) if previous is not None else now
        empty = comp.Region(0, 0, 0, 0)
        tool_region, tool_alpha = empty, None
        fist_region, fist_alpha = empty, None
        if pose.show_arm:
            comp.blend(
                frame,
                self.forearm,
                comp.motion_path(now.forearm, before.forearm, self.forearm.size),
            )
            comp.blend(
                frame, self.wrist, comp.motion_path(now.wrist, before.wrist, self.wrist.size)
            )
        if pose.show_tool:
            tool_region, tool_alpha = comp.blend(
                frame, self.tool, comp.motion_path(now.tool, before.tool, self.tool.size)
            )
        if pose.show_arm:
            fist_region, fist_alpha = comp.blend(
                frame, self.fist, comp.motion_path(now.fist, before.fist, self.fist.size)
            )
        return RigLayers(tool_region, tool_alpha, fist_region, fist_alpha)


def _paint_alpha(out: FloatImage, sprite: Sprite, m: comp.Affine) -> None:
    region, warped = comp.warp_into(sprite.bgra[..., 3], out.shape, [m])
    if warped is not None:
        roi = out[region.y0 : region.y1, region.x0 : region.x1]
        np.maximum(roi, warped.astype(np.float32) / np.float32(255.0), out=roi)


def _local(sprite: Sprite, name: str) -> Point:
    """A tool sprite point in the tool's local frame (tip at the origin)."""
    px, py = sprite.points[name]
    tx, ty = sprite.points["tip"]
    return px - tx, py - ty


def _hand_point(hand: Sprite, tool: Sprite, name: str) -> Point:
    """A tool point in a hand sprite's pixel coordinates (both share the tool's local frame)."""
    lx, ly = _local(tool, name)
    ox, oy = hand.points["tip_origin"]
    return ox + lx, oy + ly


def _offset(point: Point, height_px: float) -> Point:
    return point[0] + SHADOW_PER_HEIGHT[0] * height_px, point[1] + SHADOW_PER_HEIGHT[1] * height_px


def _shifted(m: comp.Affine, height_px: float) -> comp.Affine:
    out = m.copy()
    out[0, 2] += SHADOW_PER_HEIGHT[0] * height_px
    out[1, 2] += SHADOW_PER_HEIGHT[1] * height_px
    return out


def without_tool(pose: RigPose) -> RigPose:
    return replace(pose, show_tool=False)
