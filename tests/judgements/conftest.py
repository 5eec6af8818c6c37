"""Factories for image-judgement tests: frames of the demo station drawn by its renderer with a
known camera pose, light and content, and things that reach into zones.

The renderer is the ground truth here: the camera transform, the pin state and where an
occluder is drawn are known exactly because the test chose them.
"""

from __future__ import annotations

import math
import shutil
from collections.abc import Callable, Sequence
from pathlib import Path

import cv2
import numpy as np
import pytest

from stationcheck.config import load_config
from stationcheck.config.schema import StationConfig
from stationcheck.core.plan import ZoneSpec
from stationcheck.core.records import Frame
from stationcheck.demo_station import layout
from stationcheck.demo_station.camera import Camera, CameraTransform, Exposure
from stationcheck.demo_station.station_scene import StationScene, StationState
from stationcheck.judgements.presence import LABELS, Label, TaughtClasses
from stationcheck.judgements.teaching import CROP_MARGIN_PX, aligned_templates
from stationcheck.judgements.zone_window import U8Array, zone_box_px

REPO_ROOT = Path(__file__).resolve().parents[2]
DEMO_CONFIG = REPO_ROOT / "configs" / "demo_station.yaml"
FPS = 30.0
SKIN_BGR = (120, 150, 205)

Render = Callable[..., U8Array]


@pytest.fixture(scope="session")
def demo_config() -> StationConfig:
    return load_config(DEMO_CONFIG)


@pytest.fixture(scope="session")
def demo_zones(demo_config: StationConfig) -> list[ZoneSpec]:
    return demo_config.zone_specs()


@pytest.fixture(scope="session")
def zone_by_id(demo_zones: list[ZoneSpec]) -> dict[str, ZoneSpec]:
    return {zone.id: zone for zone in demo_zones}


@pytest.fixture(scope="session")
def demo_scene() -> StationScene:
    return StationScene()


@pytest.fixture(scope="session")
def render(demo_scene: StationScene) -> Render:
    """``render(pin_engaged=True, transform=None, gain=1.0, seed=0, stage='cover',
    noise_sigma=2.2)``: one camera frame of the still station (BGR)."""
    cameras: dict[tuple[int, float], Camera] = {}

    def draw(pin_engaged: bool = True, transform: CameraTransform | None = None,
             gain: float = 1.0, seed: int = 0, stage: str = "cover",
             noise_sigma: float = 2.2) -> U8Array:
        key = (seed % 4, noise_sigma)
        if key not in cameras:
            cameras[key] = Camera(layout.FRAME_WIDTH_PX, layout.FRAME_HEIGHT_PX, 50 + key[0],
                                  noise_sigma)
        state = StationState(stage=stage, pin_engaged=pin_engaged)  # type: ignore[arg-type]
        image = cameras[key].develop(demo_scene.image(state), transform or CameraTransform(),
                                     Exposure(gain), np.random.default_rng(seed))
        return np.asarray(image, np.uint8)

    return draw


def reach_into(image: U8Array, tip_px: tuple[float, float], from_px: tuple[float, float],
               width_px: float = 34.0, colour: tuple[int, int, int] = SKIN_BGR) -> U8Array:
    """A copy with a hand-and-forearm shape (a thick capsule) from ``from_px`` to ``tip_px``."""
    out = image.copy()
    thickness = max(1, round(width_px))
    a = (round(from_px[0]), round(from_px[1]))
    b = (round(tip_px[0]), round(tip_px[1]))
    cv2.line(out, a, b, colour, thickness, cv2.LINE_AA)
    cv2.circle(out, b, round(width_px * 0.6), colour, -1, cv2.LINE_AA)
    return out


def cover_box(image: U8Array, box: tuple[float, float, float, float],
              colour: tuple[int, int, int] = SKIN_BGR) -> U8Array:
    """A copy with a filled rectangle ``(x0, y0, x1, y1)`` (e.g. fingers over a zone)."""
    out = image.copy()
    x0, y0, x1, y1 = (round(v) for v in box)
    cv2.rectangle(out, (x0, y0), (x1 - 1, y1 - 1), colour, -1)
    return out


def frames_of(images: Sequence[U8Array], start_index: int = 0) -> list[Frame]:
    return [Frame(start_index + k, (start_index + k) / FPS, image)
            for k, image in enumerate(images)]


def zone_centre(zone: ZoneSpec) -> tuple[float, float]:
    xs = [p[0] for p in zone.polygon_px]
    ys = [p[1] for p in zone.polygon_px]
    return (sum(xs) / len(xs), sum(ys) / len(ys))


def taught_from_images(zone: ZoneSpec, images: dict[Label, list[U8Array]]) -> TaughtClasses:
    """Templates built the way the teaching store builds them, without touching disk."""
    x0, y0, x1, y1 = zone_box_px(zone.polygon_px)
    m = CROP_MARGIN_PX
    box = (m, m, m + x1 - x0, m + y1 - y0)
    crops = {label: aligned_templates(
        [cv2.cvtColor(im[y0 - m : y1 + m, x0 - m : x1 + m], cv2.COLOR_BGR2GRAY).astype(np.float32)
         for im in images.get(label, [])], box) for label in LABELS}
    return TaughtClasses(zone.id, (x0, y0, x1, y1), crops)


@pytest.fixture(scope="session")
def pin_taught(render: Render, zone_by_id: dict[str, ZoneSpec]) -> TaughtClasses:
    """The locking pin taught from four renders per class under different light."""
    gains = (0.85, 0.95, 1.05, 1.15)
    images: dict[Label, list[U8Array]] = {
        "present": [render(True, gain=g, seed=100 + k) for k, g in enumerate(gains)],
        "absent": [render(False, gain=g, seed=200 + k) for k, g in enumerate(gains)],
    }
    return taught_from_images(zone_by_id["locking_pin"], images)


@pytest.fixture
def station_copy(tmp_path: Path) -> Path:
    """The demo config and its reference frame copied to a temporary folder (no teaching)."""
    config = tmp_path / "station.yaml"
    shutil.copy(DEMO_CONFIG, config)
    (tmp_path / "demo_station").mkdir()
    shutil.copy(DEMO_CONFIG.parent / "demo_station" / "reference.png",
                tmp_path / "demo_station" / "reference.png")
    return config


def nudge(dx_px: float, dy_px: float, rot_deg: float) -> CameraTransform:
    return CameraTransform(dx_px, dy_px, rot_deg)


def true_shift_px(point: tuple[float, float], transform: CameraTransform) -> float:
    """How far ``point`` moves under a camera transform, as the renderer applies it."""
    moved = transform.apply(point, layout.FRAME_WIDTH_PX, layout.FRAME_HEIGHT_PX)
    return math.hypot(moved[0] - point[0], moved[1] - point[1])
