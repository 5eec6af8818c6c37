"""Sprites and the shading that makes flat shapes look round, for the demo renderer.

A sprite is drawn once, supersampled, in its own local frame (pixel coordinates of its canvas)
and later placed into frames with an affine transform. Colours are premultiplied by alpha so
warping and blurring stay correct at the edges.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any, cast

import cv2
import numpy as np
import numpy.typing as npt

FloatImage = npt.NDArray[np.float32]
U8Image = npt.NDArray[np.uint8]
Point = tuple[float, float]


def as_u8(array: Any) -> U8Image:
    """OpenCV's stubs type every result loosely; this names what a call returns."""
    return cast(U8Image, array)


def as_f32(array: Any) -> FloatImage:
    return cast(FloatImage, array)


SUPERSAMPLE = 3
LIGHT_DIR = np.asarray([-0.35, -0.55, 0.76], np.float32)  # from upper left, towards the camera


@dataclass(frozen=True)
class Material:
    """How a surface answers light: matte plastic, rubber, skin, cloth or polished metal."""

    ambient: float = 0.45
    diffuse: float = 0.65
    specular: float = 0.15
    shininess: float = 18.0
    metal: float = 0.0  # 0..1 mix of a banded fake environment reflection


MATTE = Material()
RUBBER = Material(ambient=0.5, diffuse=0.55, specular=0.06, shininess=8.0)
SKIN = Material(ambient=0.5, diffuse=0.6, specular=0.1, shininess=10.0)
CLOTH = Material(ambient=0.55, diffuse=0.55, specular=0.0)
CHROME = Material(ambient=0.3, diffuse=0.35, specular=0.8, shininess=40.0, metal=0.8)
STEEL = Material(ambient=0.4, diffuse=0.5, specular=0.45, shininess=25.0, metal=0.45)


@dataclass(frozen=True)
class Sprite:
    """BGRA uint8 image (colour not premultiplied, bled into the transparent border so warps
    leave no dark fringe) plus named points in its pixel coordinates."""

    bgra: npt.NDArray[np.uint8]  # H x W x 4
    points: dict[str, Point] = field(default_factory=dict)

    def __post_init__(self) -> None:
        if self.bgra.ndim != 3 or self.bgra.shape[2] != 4 or self.bgra.dtype != np.uint8:
            raise ValueError(
                f"Sprite.bgra must be H x W x 4 uint8, got {self.bgra.shape} {self.bgra.dtype}"
            )

    @property
    def alpha(self) -> FloatImage:
        return (self.bgra[..., 3].astype(np.float32) / np.float32(255.0)).astype(np.float32)

    @property
    def size(self) -> tuple[int, int]:
        return int(self.bgra.shape[1]), int(self.bgra.shape[0])


def sprite_from_layers(
    colour: FloatImage, alpha: FloatImage, points: dict[str, Point], crop: bool = True
) -> Sprite:
    """Build a sprite from unpremultiplied colour and alpha; cropped to what is visible."""
    premult = cv2.GaussianBlur(colour * alpha[..., None], (0, 0), 3.0)
    weight = cv2.GaussianBlur(alpha, (0, 0), 3.0)
    bled = premult / np.maximum(weight, 1e-4)[..., None]
    solid = alpha > 0.5
    bled[solid] = colour[solid]
    ox, oy = 0, 0
    if crop and bool((alpha > 0.004).any()):
        ys, xs = np.nonzero(alpha > 0.004)
        y0, y1 = max(0, int(ys.min()) - 2), min(alpha.shape[0], int(ys.max()) + 3)
        x0, x1 = max(0, int(xs.min()) - 2), min(alpha.shape[1], int(xs.max()) + 3)
        bled, alpha, ox, oy = bled[y0:y1, x0:x1], alpha[y0:y1, x0:x1], x0, y0
    bgra = np.dstack([np.clip(bled, 0, 255), np.clip(alpha * 255.0, 0, 255)])
    shifted = {k: (v[0] - ox, v[1] - oy) for k, v in points.items()}
    return Sprite(np.round(bgra).astype(np.uint8), shifted)


class Canvas:
    """A supersampled drawing surface in local coordinates (local (0, 0) at ``origin_px``)."""

    def __init__(self, width_px: int, height_px: int, origin_px: Point) -> None:
        self.width_px, self.height_px = width_px, height_px
        self.origin_px = origin_px
        self.rgb = np.zeros((height_px * SUPERSAMPLE, width_px * SUPERSAMPLE, 3), np.float32)
        self.alpha = np.zeros((height_px * SUPERSAMPLE, width_px * SUPERSAMPLE), np.float32)

    def ss(self, point: Point) -> tuple[int, int]:
        """Local coordinates to integer supersampled pixel coordinates."""
        x = (point[0] + self.origin_px[0] + 0.5) * SUPERSAMPLE - 0.5
        y = (point[1] + self.origin_px[1] + 0.5) * SUPERSAMPLE - 0.5
        return round(x), round(y)

    def canvas_point(self, point: Point) -> Point:
        return point[0] + self.origin_px[0], point[1] + self.origin_px[1]

    def empty_mask(self) -> npt.NDArray[np.uint8]:
        return np.zeros(self.alpha.shape, np.uint8)

    def capsule_mask(self, a: Point, b: Point, width_px: float) -> npt.NDArray[np.uint8]:
        mask = self.empty_mask()
        cv2.line(mask, self.ss(a), self.ss(b), 255, max(1, round(width_px * SUPERSAMPLE)))
        return mask

    def polygon_mask(self, points: Sequence[Point]) -> npt.NDArray[np.uint8]:
        mask = self.empty_mask()
        cv2.fillPoly(mask, [np.asarray([self.ss(p) for p in points], np.int32)], 255)
        return mask

    def ellipse_mask(
        self, centre: Point, axes_px: Point, angle_deg: float
    ) -> npt.NDArray[np.uint8]:
        mask = self.empty_mask()
        axes = (int(axes_px[0] * SUPERSAMPLE), int(axes_px[1] * SUPERSAMPLE))
        cv2.ellipse(mask, self.ss(centre), axes, angle_deg, 0, 360, 255, -1)
        return mask

    def circle_mask(self, centre: Point, radius_px: float) -> npt.NDArray[np.uint8]:
        mask = self.empty_mask()
        cv2.circle(mask, self.ss(centre), round(radius_px * SUPERSAMPLE), 255, -1)
        return mask

    def ring_mask(self, centre: Point, outer_px: float, inner_px: float) -> npt.NDArray[np.uint8]:
        mask = self.circle_mask(centre, outer_px)
        cv2.circle(mask, self.ss(centre), round(inner_px * SUPERSAMPLE), 0, -1)
        return mask

    def rounded_rect_mask(
        self, x0: float, y0: float, x1: float, y1: float, corner_px: float
    ) -> npt.NDArray[np.uint8]:
        mask = self.empty_mask()
        r = corner_px
        cv2.rectangle(mask, self.ss((x0 + r, y0)), self.ss((x1 - r, y1)), 255, -1)
        cv2.rectangle(mask, self.ss((x0, y0 + r)), self.ss((x1, y1 - r)), 255, -1)
        for cx, cy in ((x0 + r, y0 + r), (x1 - r, y0 + r), (x0 + r, y1 - r), (x1 - r, y1 - r)):
            cv2.circle(mask, self.ss((cx, cy)), round(r * SUPERSAMPLE), 255, -1)
        return mask

    def albedo_field(self, bgr: Sequence[float], field: FloatImage) -> FloatImage:
        """A colour modulated by a brightness field of the canvas' supersampled size."""
        big = cv2.resize(
            field, (self.alpha.shape[1], self.alpha.shape[0]), interpolation=cv2.INTER_LINEAR
        )
        return (big[..., None] * np.asarray(bgr, np.float32)[None, None, :]).astype(np.float32)

    def paint(
        self,
        mask: npt.NDArray[np.uint8],
        albedo: FloatImage | Sequence[float],
        radius_px: float,
        material: Material = MATTE,
        opacity: float = 1.0,
    ) -> None:
        """Paint a shape over what is there, shaded as a rounded body of ``radius_px``."""
        box = _bbox(mask, 2)
        if box is None:
            return
        ys, xs = box
        m = mask[ys, xs]
        base = albedo[ys, xs] if isinstance(albedo, np.ndarray) and albedo.ndim == 3 else albedo
        colour = shade_blob(m, base, radius_px * SUPERSAMPLE, material)
        a = (m.astype(np.float32) / 255.0) * opacity
        rgb, alpha = self.rgb[ys, xs], self.alpha[ys, xs]
        rgb *= (1.0 - a)[..., None]
        rgb += colour * a[..., None]
        alpha *= 1.0 - a
        alpha += a

    def darken(self, mask: npt.NDArray[np.uint8], factor: float, blur_px: float = 0.0) -> None:
        """Multiply the colour under a mask (grooves, slots, creases)."""
        pad = int(3 * blur_px * SUPERSAMPLE) + 2
        box = _bbox(mask, pad)
        if box is None:
            return
        ys, xs = box
        m = mask[ys, xs].astype(np.float32) / 255.0
        if blur_px > 0:
            m = as_f32(cv2.GaussianBlur(m, (0, 0), blur_px * SUPERSAMPLE))
        self.rgb[ys, xs] *= (1.0 - (1.0 - factor) * m)[..., None]

    def to_sprite(self, points: dict[str, Point]) -> Sprite:
        size = (self.width_px, self.height_px)
        premult = cv2.resize(self.rgb, size, interpolation=cv2.INTER_AREA)  # rgb is premultiplied
        alpha = as_f32(cv2.resize(self.alpha, size, interpolation=cv2.INTER_AREA))
        colour = premult / np.maximum(alpha, 1e-4)[..., None]
        return sprite_from_layers(
            colour.astype(np.float32), alpha, {k: self.canvas_point(v) for k, v in points.items()}
        )


def _bbox(mask: npt.NDArray[np.uint8], pad: int) -> tuple[slice, slice] | None:
    x, y, w, h = cv2.boundingRect(mask)
    if w == 0 or h == 0:
        return None
    y0, x0 = max(0, y - pad), max(0, x - pad)
    y1, x1 = min(mask.shape[0], y + h + pad), min(mask.shape[1], x + w + pad)
    return slice(y0, y1), slice(x0, x1)


def shade_blob(
    mask: npt.NDArray[np.uint8],
    albedo: FloatImage | Sequence[float],
    radius_px: float,
    material: Material,
) -> FloatImage:
    """Colour of a shape lit as if it bulged up with a round profile of ``radius_px``."""
    dist = cv2.distanceTransform((mask > 127).astype(np.uint8), cv2.DIST_L2, 5)
    d = np.minimum(dist / max(radius_px, 1e-3), 1.0)
    height = np.sqrt(np.clip(1.0 - (1.0 - d) ** 2, 0.0, 1.0)) * radius_px
    gx = cv2.Sobel(height, cv2.CV_32F, 1, 0, ksize=3) / 8.0
    gy = cv2.Sobel(height, cv2.CV_32F, 0, 1, ksize=3) / 8.0
    norm = np.sqrt(gx * gx + gy * gy + 1.0)
    nx, ny, nz = -gx / norm, -gy / norm, 1.0 / norm
    return shade_normals(nx, ny, nz, albedo, material)


def shade_normals(
    nx: FloatImage,
    ny: FloatImage,
    nz: FloatImage,
    albedo: FloatImage | Sequence[float],
    material: Material,
) -> FloatImage:
    lx, ly, lz = (float(v) for v in LIGHT_DIR)
    lambert = np.maximum(nx * lx + ny * ly + nz * lz, 0.0)
    hx, hy, hz = lx, ly, lz + 1.0
    hn = math.sqrt(hx * hx + hy * hy + hz * hz)
    spec = np.maximum((nx * hx + ny * hy + nz * hz) / hn, 0.0) ** material.shininess
    light = material.ambient + material.diffuse * lambert
    base = np.asarray(albedo, np.float32)
    if base.ndim == 1:
        base = base[None, None, :]
    colour = base * light[..., None]
    if material.metal > 0:
        band = 0.5 + 0.5 * np.sin(ny * 5.0 + nx * 3.0)
        env = (0.35 + 0.9 * band**3)[..., None] * np.float32(200.0)
        colour = colour * (1.0 - material.metal) + env * material.metal * (base / 160.0)
    colour += (255.0 * material.specular) * spec[..., None]
    return as_f32(colour.astype(np.float32))
