"""What the camera adds to a composed scene: its pose, the light, lens fall-off and noise.

The camera transform is a rotation about the image centre followed by a shift, applied to the
whole image: a reference-frame point ``p`` lands at ``R(rot) (p - c) + c + (dx, dy)``.

A :class:`View` is how another station's camera frames the same bench: zoom, tilt (a keystone:
the camera looks down at an angle), rotation about the image centre and the delivered frame
size. It maps the 640x480 developed picture to the delivered one with one homography, and the
ground truth goes through the same matrix.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.demo_station import compositor as comp
from stationcheck.demo_station import textures
from stationcheck.demo_station.shading import Point, as_u8

U8Image = comp.U8Image


@dataclass(frozen=True)
class CameraTransform:
    """How far the camera has moved from where the reference frame was taken."""

    dx_px: float = 0.0
    dy_px: float = 0.0
    rot_deg: float = 0.0

    def matrix(self, width_px: int, height_px: int) -> comp.Affine:
        c = ((width_px - 1) / 2.0, (height_px - 1) / 2.0)
        m = comp.pose_affine(c, (c[0] + self.dx_px, c[1] + self.dy_px), math.radians(self.rot_deg))
        return m

    def apply(self, point: Point, width_px: int, height_px: int) -> Point:
        return comp.apply(self.matrix(width_px, height_px), point)

    @property
    def is_identity(self) -> bool:
        return self.dx_px == 0.0 and self.dy_px == 0.0 and self.rot_deg == 0.0


@dataclass(frozen=True)
class View:
    """``zoom``: magnification about the centre (1 = as drawn); ``tilt_deg``: how far the
    camera leans forward from looking straight down (the far edge shrinks); ``rot_deg``:
    rotation about the centre; ``width_px``/``height_px``: the delivered frame size."""

    zoom: float = 1.0
    tilt_deg: float = 0.0
    rot_deg: float = 0.0
    width_px: int = 640
    height_px: int = 480

    def __post_init__(self) -> None:
        if not 0.5 <= self.zoom <= 2.5:
            raise ValueError(f"View.zoom must be in [0.5, 2.5], got {self.zoom!r}")
        if not -30.0 <= self.tilt_deg <= 30.0:
            raise ValueError(f"View.tilt_deg must be in [-30, 30], got {self.tilt_deg!r}")
        if not -180.0 <= self.rot_deg <= 180.0:
            raise ValueError(f"View.rot_deg must be in [-180, 180], got {self.rot_deg!r}")
        for name in ("width_px", "height_px"):
            value = getattr(self, name)
            if not isinstance(value, int) or not 64 <= value <= 4096:
                raise ValueError(f"View.{name} must be an integer in [64, 4096], got {value!r}")

    @property
    def is_identity(self) -> bool:
        return self == View()

    def homography(self, width_px: int, height_px: int) -> npt.NDArray[np.float64]:
        """The 3x3 matrix from a ``width_px`` x ``height_px`` developed frame to this view."""
        cx, cy = (width_px - 1) / 2.0, (height_px - 1) / 2.0
        centre = np.array([[1, 0, -cx], [0, 1, -cy], [0, 0, 1]], np.float64)
        # keystone: a plane tilted about the horizontal axis, seen by a camera of focal length
        # about the frame width (a normal lens), then scaled back so the centre row keeps size
        k = math.tan(math.radians(self.tilt_deg)) / float(width_px)
        tilt = np.array([[1, 0, 0], [0, 1, 0], [0, k, 1]], np.float64)
        a = math.radians(self.rot_deg)
        rotate = np.array(
            [[math.cos(a), -math.sin(a), 0], [math.sin(a), math.cos(a), 0], [0, 0, 1]], np.float64
        )
        zoom = np.diag([self.zoom, self.zoom, 1.0])
        sx, sy = self.width_px / width_px, self.height_px / height_px
        out_cx, out_cy = (self.width_px - 1) / 2.0, (self.height_px - 1) / 2.0
        place = np.array([[sx, 0, out_cx], [0, sy, out_cy], [0, 0, 1]], np.float64)
        matrix = place @ zoom @ rotate @ tilt @ centre
        return np.asarray(matrix / matrix[2, 2], np.float64)

    def apply(self, point: Point, width_px: int, height_px: int) -> Point:
        """Where a point of the developed frame lands in the delivered one."""
        if self.is_identity:
            return point
        h = self.homography(width_px, height_px)
        x, y, w = h @ np.array([point[0], point[1], 1.0])
        return float(x / w), float(y / w)

    def warp(self, image: U8Image) -> U8Image:
        """The delivered frame (edges outside the developed picture are reflected)."""
        if self.is_identity:
            return image
        height_px, width_px = image.shape[:2]
        h = self.homography(width_px, height_px)
        size = (self.width_px, self.height_px)
        if self.tilt_deg == 0.0:
            return as_u8(
                cv2.warpAffine(
                    image, h[:2], size, flags=cv2.INTER_LINEAR, borderMode=cv2.BORDER_REFLECT_101
                )
            )
        return as_u8(
            cv2.warpPerspective(
                image, h, size, flags=cv2.INTER_LINEAR, borderMode=cv2.BORDER_REFLECT_101
            )
        )


@dataclass(frozen=True)
class Exposure:
    """Overall light level and colour cast for one frame (1.0 = as drawn)."""

    gain: float = 1.0
    tint_bgr: tuple[float, float, float] = (1.0, 1.0, 1.0)


class Camera:
    """Develops composed frames: pose warp, light map (vignette and fall-off), sensor noise."""

    def __init__(
        self,
        width_px: int,
        height_px: int,
        seed: int,
        noise_sigma: float,
        vignette: float = 0.22,
        light_from: Point = (0.25, 0.2),
        falloff: float = 0.2,
        lens_blur_px: float = 0.0,
    ) -> None:
        self.width_px, self.height_px = width_px, height_px
        self.lens_blur_px = lens_blur_px
        rng = np.random.default_rng(seed)
        light = textures.vignette(height_px, width_px, vignette)
        ys, xs = np.mgrid[0:height_px, 0:width_px].astype(np.float32)
        d = np.hypot(xs / width_px - light_from[0], ys / height_px - light_from[1])
        light *= (1.0 + falloff * (0.5 - d)).astype(np.float32)
        self._light_u8 = as_u8(np.clip(np.dstack([light] * 3) * 128.0, 0, 255).astype(np.uint8))
        self._tinted: dict[tuple[float, float, float], U8Image] = {}
        self._noise = (
            textures.NoiseBank(rng, height_px, width_px, noise_sigma) if noise_sigma > 0 else None
        )
        self._rng = rng

    def develop(
        self,
        scene: U8Image,
        transform: CameraTransform,
        exposure: Exposure,
        rng: np.random.Generator | None = None,
    ) -> U8Image:
        """Camera image of a composed scene (uint8 BGR, not modified)."""
        if self.lens_blur_px > 0:
            scene = as_u8(cv2.GaussianBlur(scene, (0, 0), self.lens_blur_px))
        if transform.is_identity:
            image = scene
        else:
            image = as_u8(
                cv2.warpAffine(
                    scene,
                    transform.matrix(self.width_px, self.height_px),
                    (self.width_px, self.height_px),
                    flags=cv2.INTER_LINEAR,
                    borderMode=cv2.BORDER_REFLECT_101,
                )
            )
        out = as_u8(
            cv2.multiply(image, self._light_map(exposure.tint_bgr), scale=exposure.gain / 128.0)
        )
        if self._noise is not None:
            out = self._noise.apply(out, rng or self._rng)
        return out

    def _light_map(self, tint_bgr: tuple[float, float, float]) -> U8Image:
        """Vignette and fall-off times a colour cast (cached: use a few fixed casts)."""
        if tint_bgr == (1.0, 1.0, 1.0):
            return self._light_u8
        cached = self._tinted.get(tint_bgr)
        if cached is None:
            cached = as_u8(cv2.multiply(self._light_u8, np.asarray([*tint_bgr, 0.0])))
            if len(self._tinted) < 64:
                self._tinted[tint_bgr] = cached
        return cached
