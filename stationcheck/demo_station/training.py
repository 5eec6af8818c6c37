"""Random labelled frames for training the tool keypoint model, and a COCO keypoint writer.

Two kinds of frame, both 640x480 BGR uint8 with the keypoints ``tip`` and ``rear`` as a (2, 3)
float array of (x, y, v) in pixel-index coordinates (the centre of the top-left pixel is (0, 0),
as in COCO). ``v`` follows COCO: 0 not labelled (no tool, or the point is outside the frame;
x = y = 0 then), 1 labelled but hidden (under a hand), 2 visible.

- :func:`render_training_sample`: the tool anywhere, at any angle and scale, on random benches
  with distractors, random light and camera; sometimes no tool, sometimes cut off or covered.
- :func:`render_station_sample`: the demo station itself with a random operator state, as the
  model sees it at run time (random operators' sleeves and gloves, small camera moves), and
  often as another station would show it: another tool, glove, lamp direction and level,
  camera mounting (zoom, tilt, roll) and resolution.
- :func:`render_own_station_sample`: the demo station with its own tool only (the mountings
  and operators still vary), to weigh the station's own tool more in a training mix.

Tools, gloves, lamps and views are randomised (:mod:`~stationcheck.demo_station.randomise`)
but never drawn from the held-out looks (:mod:`~stationcheck.demo_station.held_out_looks`).
- :func:`render_moving_sample`: either kind with the tool moving fast during the exposure, and
  the tip's step since the previous frame (to measure how far a model places a blurred tip
  behind the label).

Sprites, benches and props come from pools built once per process from fixed seeds, so a sample
depends only on the generator passed in.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Generic, TypeVar

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.demo_station import compositor as comp
from stationcheck.demo_station import layout, props, textures
from stationcheck.demo_station.arm_sprite import DEMO_ARM
from stationcheck.demo_station.camera import Camera, CameraTransform, Exposure, View
from stationcheck.demo_station.randomise import (
    random_arm,
    random_light_from,
    random_tool,
    random_view,
)
from stationcheck.demo_station.rig import OperatorRig, RigPose, SoftShadow
from stationcheck.demo_station.shading import Sprite, as_u8
from stationcheck.demo_station.station_scene import StationScene, StationState
from stationcheck.demo_station.tool_sprite import DEMO_TOOL

WIDTH_PX, HEIGHT_PX = layout.FRAME_WIDTH_PX, layout.FRAME_HEIGHT_PX
KEYPOINT_NAMES = ("tip", "rear")
NO_TOOL_P = 0.1
CROSS_ORDER = (1, 4, 2, 5, 3, 6)  # screws get seated in this order on the demo station
BENCH_MARGIN_PX = 64
FAST_STEP_PX = (10.0, 36.0)  # tip travel per frame of render_moving_sample
OTHER_TOOL_P = 0.4  # station frames with another station's tool and operator
VIEW_P = 0.3  # station frames seen through another camera mounting
LOW_RES_P = 0.15  # frames from a lower-resolution camera, scaled up to 640x480
PLAIN_CAMERAS = 4  # the first cameras light the bench as the demo station does
# colour casts of the light (a few fixed ones, so the camera can cache its light maps)
TINTS: tuple[tuple[float, float, float], ...] = (
    *(
        (float(b), 1.0, float(r))
        for b, r in np.random.default_rng(77).uniform(0.78, 1.22, (16, 2)).round(3)
    ),
    (1.0, 1.0, 1.0),
)
STATION_TINTS: tuple[tuple[float, float, float], ...] = (
    (1.0, 1.0, 1.0),
    (0.97, 1.0, 1.03),
    (1.03, 1.0, 0.97),
)
U8Image = comp.U8Image
Keypoints = npt.NDArray[np.float32]
MotionFn = Callable[[RigPose, np.random.Generator], RigPose | None]


@dataclass(frozen=True)
class Sample:
    image: U8Image
    keypoints: Keypoints  # (2, 3): tip, rear as (x, y, v)
    tool_mask: npt.NDArray[np.bool_] | None  # visible tool pixels, when asked for


T = TypeVar("T")


class _LazyPool(Generic[T]):
    """``size`` items, each made from its own seed the first time it is drawn, so a sample
    depends only on the generator passed in, whatever was drawn before."""

    def __init__(self, size: int, make: Callable[[int], T]) -> None:
        self._items: list[T | None] = [None] * size
        self._make = make

    def __len__(self) -> int:
        return len(self._items)

    def __getitem__(self, index: int) -> T:
        item = self._items[index]
        if item is None:
            item = self._items[index] = self._make(index)
        return item

    def draw(self, rng: np.random.Generator) -> T:
        return self[int(rng.integers(len(self._items)))]


def _bench(index: int) -> U8Image:
    rng = np.random.default_rng(90210 + index)
    kind = textures.BENCH_KINDS[index % len(textures.BENCH_KINDS)]
    h, w = HEIGHT_PX + BENCH_MARGIN_PX, WIDTH_PX + BENCH_MARGIN_PX
    return as_u8(np.clip(textures.bench(rng, h, w, kind), 0, 255).astype(np.uint8))


def _prop(index: int) -> tuple[Sprite, SoftShadow]:
    rng = np.random.default_rng(4711 + index)
    sprite = props.MAKERS[index % len(props.MAKERS)](rng)
    return sprite, SoftShadow.of(sprite, 2.5)


def _random_rig(index: int) -> OperatorRig:
    rng = np.random.default_rng(100 + index)
    return OperatorRig(random_tool(rng), random_arm(rng), seed=100 + index)


def _station_rig(index: int) -> OperatorRig:
    """The station's own tool in the hands of different operators (index 0: the video's)."""
    if index == 0:
        return OperatorRig(DEMO_TOOL, DEMO_ARM, seed=7)
    return OperatorRig(DEMO_TOOL, random_arm(np.random.default_rng(200 + index)), seed=200 + index)


def _camera(index: int) -> Camera:
    if index < PLAIN_CAMERAS:
        sigma, blur = ((1.8, 0.7), (3.0, 0.0), (5.0, 0.0), (1.2, 0.5))[index]
        return Camera(WIDTH_PX, HEIGHT_PX, 300 + index, sigma, lens_blur_px=blur)
    rng = np.random.default_rng(300 + index)  # another lamp and lens
    return Camera(
        WIDTH_PX,
        HEIGHT_PX,
        300 + index,
        float(rng.uniform(0.8, 5.0)),
        vignette=float(rng.uniform(0.0, 0.45)),
        light_from=random_light_from(rng),
        falloff=float(rng.uniform(0.0, 0.6)),
        lens_blur_px=float(rng.choice([0.0, 0.5, 0.9, 1.3])),
    )


@dataclass
class _Pools:
    benches: _LazyPool[U8Image]
    props: _LazyPool[tuple[Sprite, SoftShadow]]
    rigs: _LazyPool[OperatorRig]
    station_rigs: _LazyPool[OperatorRig]
    cameras: _LazyPool[Camera]
    scene: StationScene


@functools.lru_cache(maxsize=1)
def _pools() -> _Pools:
    return _Pools(
        benches=_LazyPool(20, _bench),
        props=_LazyPool(44, _prop),
        rigs=_LazyPool(48, _random_rig),
        station_rigs=_LazyPool(6, _station_rig),
        cameras=_LazyPool(16, _camera),
        scene=StationScene(),
    )


def render_training_sample(rng: np.random.Generator) -> tuple[U8Image, Keypoints]:
    """A random labelled frame: (480x640x3 BGR uint8, keypoints (2, 3) tip/rear (x, y, v))."""
    sample = _random_sample(rng, want_mask=False)
    return sample.image, sample.keypoints


def render_station_sample(rng: np.random.Generator) -> tuple[U8Image, Keypoints]:
    """A labelled frame of the demo station with a random operator state (same layout as
    :func:`render_training_sample`)."""
    sample = _station_sample(rng, want_mask=False)
    return sample.image, sample.keypoints


def render_own_station_sample(rng: np.random.Generator) -> tuple[U8Image, Keypoints]:
    """A labelled frame of the demo station with its own tool in the hands of random operators
    (the station's lamps, camera moves and other mountings; never another tool)."""
    sample = _station_sample(rng, want_mask=False, other_tool_p=0.0)
    return sample.image, sample.keypoints


def render_moving_sample(
    rng: np.random.Generator,
) -> tuple[U8Image, Keypoints, tuple[float, float]]:
    """A station or random frame (half each) whose tool moved by a fast step during the
    exposure: (image, keypoints as above, the tip's step (dx, dy) in pixels since the previous
    frame). Drawn as the sample video draws moves, the label at the end of the step."""
    step: list[tuple[float, float]] = []

    def fast(pose: RigPose, rng: np.random.Generator) -> RigPose:
        speed = float(rng.uniform(*FAST_STEP_PX))
        direction = float(rng.uniform(-math.pi, math.pi))
        step.append((speed * math.cos(direction), speed * math.sin(direction)))
        return replace(
            pose,
            tip_px=(pose.tip_px[0] - step[-1][0], pose.tip_px[1] - step[-1][1]),
            angle_rad=pose.angle_rad - float(rng.normal(0, 0.03)),
        )

    if rng.random() < 0.5:
        sample = _station_sample(rng, want_mask=False, motion=fast)
    else:
        sample = _random_sample(rng, want_mask=False, motion=fast)
    return sample.image, sample.keypoints, step[-1] if step else (0.0, 0.0)


def write_coco_dataset(
    out_dir: str | Path, count: int, seed: int, station_fraction: float = 0.5
) -> Path:
    """Write ``count`` labelled frames as JPEG images plus a COCO keypoint JSON; returns the
    JSON's path. ``station_fraction`` of the frames show the demo station."""
    from stationcheck.demo_station.coco_dataset import write_dataset

    return write_dataset(Path(out_dir), count, seed, station_fraction)


def render_sample(rng: np.random.Generator, station_fraction: float, want_mask: bool) -> Sample:
    if rng.random() < station_fraction:
        return _station_sample(rng, want_mask)
    return _random_sample(rng, want_mask)


def _random_sample(
    rng: np.random.Generator, want_mask: bool, motion: MotionFn | None = None
) -> Sample:
    pools = _pools()
    bench = pools.benches.draw(rng)
    oy, ox = int(rng.integers(0, BENCH_MARGIN_PX)), int(rng.integers(0, BENCH_MARGIN_PX))
    frame = bench[oy : oy + HEIGHT_PX, ox : ox + WIDTH_PX]
    flip = int(rng.integers(-1, 3))
    frame = as_u8(cv2.flip(frame, flip)) if flip < 2 else frame.copy()
    for _ in range(int(rng.integers(0, 6))):
        _paste_prop(frame, pools.props.draw(rng), rng)
    rig = pools.rigs.draw(rng)
    pose = _random_pose(rng) if rng.random() > NO_TOOL_P else None
    extra = None
    if pose is not None:
        previous = (motion or _moved)(pose, rng)
        rig.draw_on(frame, pose, previous, float(rng.uniform(0.25, 0.5)))
        if rng.random() < 0.15:  # another hand over the tool
            extra = (pools.rigs.draw(rng), _covering_pose(pose, rig, rng))
            extra[0].draw_on(frame, extra[1], None, 0.35)
    elif rng.random() < 0.5:  # an empty hand where the tool would be
        other = pools.rigs.draw(rng)
        other.draw_on(frame, replace(_random_pose(rng), show_tool=False), None, 0.35)
    camera = pools.cameras.draw(rng)
    exposure = Exposure(float(rng.uniform(0.6, 1.35)), TINTS[int(rng.integers(len(TINTS)))])
    image = camera.develop(frame, CameraTransform(), exposure, rng)
    view = random_view(rng) if rng.random() < 0.5 * VIEW_P else View()
    image = _degrade(view.warp(image), rng)
    return _label(image, rig, pose, extra, CameraTransform(), want_mask, view)


def _station_sample(
    rng: np.random.Generator,
    want_mask: bool,
    motion: MotionFn | None = None,
    other_tool_p: float = OTHER_TOOL_P,
) -> Sample:
    pools = _pools()
    stage = ("empty", "gasket", "cover", "cover", "cover")[int(rng.integers(5))]
    done = {f"screw_{n}" for n in CROSS_ORDER[: int(rng.integers(0, layout.BOLT_COUNT + 1))]}
    screws = tuple(
        "seated" if f"screw_{i + 1}" in done else "loose" for i in range(layout.BOLT_COUNT)
    )
    state = StationState(stage, screws, bool(rng.random() < 0.6))  # type: ignore[arg-type]
    frame = pools.scene.image(state).copy()
    other = rng.random() < other_tool_p
    rig = pools.rigs.draw(rng) if other else pools.station_rigs.draw(rng)
    pose = _station_pose(rng) if rng.random() > NO_TOOL_P else None
    if pose is not None:
        rig.draw_on(frame, pose, (motion or _moved)(pose, rng), 0.4)
    draw = rng.random()
    if draw < 0.55:  # the camera where it was set up (no resampling)
        transform = CameraTransform()
    elif draw < 0.75:  # vibration
        dx, dy = rng.normal(0, 0.4, 2)
        transform = CameraTransform(float(dx), float(dy), float(rng.normal(0, 0.05)))
    else:  # knocked or re-mounted
        dx, dy = rng.uniform(-14, 14, 2)
        transform = CameraTransform(float(dx), float(dy), float(rng.uniform(-2, 2)))
    if other:  # another station: any lamp, level and colour
        camera = pools.cameras.draw(rng)
        exposure = Exposure(float(rng.uniform(0.55, 1.3)), TINTS[int(rng.integers(len(TINTS)))])
    else:
        camera = pools.cameras[(0, 0, 1, 3)[int(rng.integers(4))]]
        exposure = Exposure(
            float(rng.uniform(0.85, 1.15)), STATION_TINTS[int(rng.integers(len(STATION_TINTS)))]
        )
    view = random_view(rng) if rng.random() < VIEW_P else View()
    image = _degrade(view.warp(camera.develop(frame, transform, exposure, rng)), rng)
    return _label(image, rig, pose, None, transform, want_mask, view)


def _random_pose(rng: np.random.Generator) -> RigPose:
    tip = (float(rng.uniform(-40, WIDTH_PX + 40)), float(rng.uniform(-40, HEIGHT_PX + 40)))
    angle = float(rng.uniform(-math.pi, math.pi))
    reach = float(rng.uniform(380, 620))
    bend = float(rng.normal(0, 0.3))
    elbow = (tip[0] + reach * math.cos(angle + bend), tip[1] + reach * math.sin(angle + bend))
    lift = float(rng.uniform(0, 80))
    return RigPose(
        tip,
        angle,
        float(rng.uniform(0.65, 1.35)),
        float(rng.uniform(0.55, 1.0)),
        lift,
        elbow,
        show_arm=bool(rng.random() < 0.85),
    )


def _station_pose(rng: np.random.Generator) -> RigPose:
    """Where an operator's tool tends to be on this station: screws, bins, pin, in between."""
    screws = layout.screw_positions()
    kind = rng.random()
    if kind < 0.5:
        s = screws[int(rng.integers(len(screws)))]
        tip = (s.x_px + float(rng.normal(0, 3)), s.y_px + float(rng.normal(0, 3)))
        lift = float(abs(rng.normal(0, 4)))
    elif kind < 0.65:
        box = (layout.LEFT_BIN_PX, layout.RIGHT_BIN_PX)[int(rng.integers(2))]
        tip = (
            float(rng.uniform(box[0] + 10, box[2] - 10)),
            float(rng.uniform(box[1] - 30, box[3] - 40)),
        )
        lift = float(rng.uniform(5, 40))
    elif kind < 0.72:
        tip = (float(rng.uniform(410, 480)), float(rng.uniform(300, 400)))
        lift = float(rng.uniform(0, 30))
    else:
        tip = (float(rng.uniform(-30, WIDTH_PX + 30)), float(rng.uniform(-30, HEIGHT_PX + 60)))
        lift = float(rng.uniform(0, 70))
    elbow = (float(rng.uniform(360, 600)), float(rng.uniform(560, 720)))
    angle = math.atan2(elbow[1] - tip[1], elbow[0] - tip[0]) + float(rng.normal(-0.15, 0.18))
    scale = float(rng.uniform(0.94, 1.04)) * (1.0 + 0.0015 * lift)
    return RigPose(tip, angle, scale, float(rng.uniform(0.85, 1.0)), lift, elbow)


def _moved(pose: RigPose, rng: np.random.Generator) -> RigPose | None:
    """The pose one frame earlier, for motion blur (most frames are still)."""
    if rng.random() < 0.65:
        return None
    step = rng.normal(0, 8, 2)
    return RigPose(
        (pose.tip_px[0] - float(step[0]), pose.tip_px[1] - float(step[1])),
        pose.angle_rad - float(rng.normal(0, 0.03)),
        pose.scale,
        pose.foreshorten,
        pose.lift_px,
        pose.elbow_px,
        pose.show_arm,
        pose.show_tool,
    )


def _covering_pose(pose: RigPose, rig: OperatorRig, rng: np.random.Generator) -> RigPose:
    """An empty hand whose fist lies over the tip or the rear."""
    tip, rear = rig.keypoints(pose)
    target = tip if rng.random() < 0.5 else rear
    angle = float(rng.uniform(-math.pi, math.pi))
    centre = (target[0] + float(rng.normal(0, 15)), target[1] + float(rng.normal(0, 15)))
    start = (centre[0] - 90 * math.cos(angle), centre[1] - 90 * math.sin(angle))
    elbow = (start[0] + 600 * math.cos(angle), start[1] + 600 * math.sin(angle))
    return RigPose(start, angle, float(rng.uniform(0.8, 1.2)), 1.0, 30.0, elbow, True, False)


def _paste_prop(frame: U8Image, prop: tuple[Sprite, SoftShadow], rng: np.random.Generator) -> None:
    sprite, soft = prop
    at = (float(rng.uniform(0, WIDTH_PX)), float(rng.uniform(0, HEIGHT_PX)))
    m = comp.pose_affine(
        sprite.points["centre"],
        at,
        float(rng.uniform(-math.pi, math.pi)),
        *(float(rng.uniform(0.7, 1.3)),) * 2,
    )
    shadow = m.copy()
    shadow[:, 2] += (2.0, 3.0)
    comp.darken(frame, soft.alpha, [soft.affine(shadow)], 0.35)
    comp.blend(frame, sprite, [m])


def _degrade(image: U8Image, rng: np.random.Generator) -> U8Image:
    if rng.random() < LOW_RES_P:
        scale = float(rng.uniform(0.45, 0.8))
        small = cv2.resize(image, None, fx=scale, fy=scale, interpolation=cv2.INTER_AREA)
        image = as_u8(cv2.resize(small, (WIDTH_PX, HEIGHT_PX), interpolation=cv2.INTER_LINEAR))
    if rng.random() < 0.25:
        image = as_u8(cv2.GaussianBlur(image, (0, 0), float(rng.uniform(0.5, 1.4))))
    if rng.random() < 0.3:
        ok, buf = cv2.imencode(".jpg", image, [cv2.IMWRITE_JPEG_QUALITY, int(rng.integers(40, 92))])
        if ok:
            image = as_u8(cv2.imdecode(buf, cv2.IMREAD_COLOR))
    return image


def _label(
    image: U8Image,
    rig: OperatorRig,
    pose: RigPose | None,
    extra: tuple[OperatorRig, RigPose] | None,
    transform: CameraTransform,
    want_mask: bool,
    view: View | None = None,
) -> Sample:
    view = view or View()
    kps = np.zeros((2, 3), np.float32)
    if pose is None:
        return Sample(image, kps, np.zeros(image.shape[:2], bool) if want_mask else None)
    for row, point in enumerate(rig.keypoints(pose)):
        hidden = rig.occluder_alpha_at(pose, point)
        if extra is not None:
            hidden = max(hidden, extra[0].arm_alpha_at(extra[1], point))
        x, y = view.apply(transform.apply(point, WIDTH_PX, HEIGHT_PX), WIDTH_PX, HEIGHT_PX)
        if 0.0 <= x <= WIDTH_PX - 1 and 0.0 <= y <= HEIGHT_PX - 1:
            kps[row] = (x, y, 1.0 if hidden >= 0.5 else 2.0)
    mask = None
    if want_mask:
        tool, over = rig.coverage(pose, image.shape[:2])
        if extra is not None:
            over = np.maximum(over, extra[0].arm_coverage(extra[1], image.shape[:2]))
        visible = np.clip(tool - over, 0.0, 1.0)
        if not transform.is_identity:
            visible = cv2.warpAffine(
                visible,
                transform.matrix(WIDTH_PX, HEIGHT_PX),
                (WIDTH_PX, HEIGHT_PX),
                flags=cv2.INTER_LINEAR,
            )
        if not view.is_identity:
            visible = view.warp(as_u8(np.round(255.0 * visible).astype(np.uint8))) / 255.0
        mask = visible >= 0.5
    return Sample(image, kps, mask)
