"""Placing sprites into a frame: affine poses, soft shadows and motion blur.

Only the region a sprite covers is warped and blended, which keeps a frame to a few
milliseconds. ``Affine`` matrices are OpenCV's 2 x 3 (sprite pixel -> frame pixel).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import cast

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.demo_station.shading import FloatImage, Point, Sprite, as_u8

Affine = npt.NDArray[np.float64]  # 2 x 3
U8Image = npt.NDArray[np.uint8]


def pose_affine(
    anchor_src: Point,
    anchor_dst: Point,
    angle_rad: float,
    scale_x: float = 1.0,
    scale_y: float = 1.0,
) -> Affine:
    """Map sprite point ``anchor_src`` to ``anchor_dst``; the sprite's +x turns to ``angle_rad``."""
    c, s = math.cos(angle_rad), math.sin(angle_rad)
    lin = np.asarray([[c * scale_x, -s * scale_y], [s * scale_x, c * scale_y]], np.float64)
    t = np.asarray(anchor_dst, np.float64) - lin @ np.asarray(anchor_src, np.float64)
    return cast(Affine, np.hstack([lin, t[:, None]]))


def compose(outer: Affine, inner: Affine) -> Affine:
    """``outer`` after ``inner``."""
    a = np.vstack([outer, [0.0, 0.0, 1.0]]) @ np.vstack([inner, [0.0, 0.0, 1.0]])
    return cast(Affine, a[:2])


def apply(m: Affine, point: Point) -> Point:
    x = m[0, 0] * point[0] + m[0, 1] * point[1] + m[0, 2]
    y = m[1, 0] * point[0] + m[1, 1] * point[1] + m[1, 2]
    return float(x), float(y)


def invert(m: Affine) -> Affine:
    return cast(Affine, cv2.invertAffineTransform(m))


@dataclass(frozen=True)
class Region:
    x0: int
    y0: int
    x1: int
    y1: int

    @property
    def empty(self) -> bool:
        return self.x1 <= self.x0 or self.y1 <= self.y0


def covered_region(shape: tuple[int, int], size: tuple[int, int], ms: Sequence[Affine]) -> Region:
    """Frame region touched by a ``size`` (w, h) sprite under any of the affines, clipped."""
    w, h = size
    corners = np.asarray([[0, 0, 1], [w, 0, 1], [0, h, 1], [w, h, 1]], np.float64).T
    pts = np.hstack([m @ corners for m in ms])
    x0 = max(0, math.floor(pts[0].min()) - 1)
    y0 = max(0, math.floor(pts[1].min()) - 1)
    x1 = min(shape[1], math.ceil(pts[0].max()) + 2)
    y1 = min(shape[0], math.ceil(pts[1].max()) + 2)
    return Region(x0, y0, x1, y1)


def warp_into(
    image: npt.NDArray[np.uint8], shape: tuple[int, int], ms: Sequence[Affine]
) -> tuple[Region, npt.NDArray[np.uint8] | None]:
    """Warp ``image`` to the frame region it covers. With several affines (motion during the
    exposure) the image is warped once at the last one and smeared along the path of the
    others by whole-pixel shifts, which is smooth and cheap."""
    region = covered_region(shape, (image.shape[1], image.shape[0]), ms)
    if region.empty:
        return region, None
    size = (region.x1 - region.x0, region.y1 - region.y0)
    last = ms[-1].copy()
    last[0, 2] -= region.x0
    last[1, 2] -= region.y0
    warped = cv2.warpAffine(
        image, last, size, flags=cv2.INTER_LINEAR, borderMode=cv2.BORDER_CONSTANT, borderValue=0
    )
    if len(ms) == 1:
        return region, as_u8(warped)
    centre = (image.shape[1] / 2.0, image.shape[0] / 2.0)
    end = apply(ms[-1], centre)
    shifts = {
        (round(apply(m, centre)[0] - end[0]), round(apply(m, centre)[1] - end[1])) for m in ms
    }
    h, w = warped.shape[:2]
    acc = np.zeros(warped.shape, np.uint16)
    for dx, dy in shifts:
        if abs(dx) >= w or abs(dy) >= h:
            continue
        dst = acc[max(0, dy) : h - max(0, -dy), max(0, dx) : w - max(0, -dx)]
        src = warped[max(0, -dy) : h - max(0, dy), max(0, -dx) : w - max(0, dx)]
        cv2.add(dst, src, dst=dst, dtype=cv2.CV_16U)
    return region, as_u8(cv2.convertScaleAbs(acc, alpha=1.0 / len(shifts)))


def motion_path(
    m_now: Affine,
    m_before: Affine,
    sprite_size: tuple[int, int],
    step_px: float = 2.0,
    max_samples: int = 7,
) -> list[Affine]:
    """Affines along the exposure (the second half of the frame interval) ending at ``m_now``,
    about ``step_px`` apart at the sprite's centre."""
    centre = (sprite_size[0] / 2.0, sprite_size[1] / 2.0)
    moved = math.dist(apply(m_now, centre), apply(m_before, centre)) * 0.5
    count = min(max_samples, 1 + int(moved / step_px))
    if count <= 1:
        return [m_now]
    return [m_before + (m_now - m_before) * (0.5 + 0.5 * k / (count - 1)) for k in range(count)]


def blend(frame: U8Image, sprite: Sprite, ms: Sequence[Affine]) -> tuple[Region, FloatImage | None]:
    """Alpha-blend the sprite over the frame in place; returns its coverage (alpha, 0..1) in the
    region it touched."""
    region, warped = warp_into(sprite.bgra, frame.shape[:2], ms)
    if warped is None:
        return region, None
    roi = frame[region.y0 : region.y1, region.x0 : region.x1]
    alpha = warped[..., 3].astype(np.float32) * np.float32(1.0 / 255.0)
    colour = np.ascontiguousarray(warped[..., :3])
    cv2.blendLinear(colour, roi, alpha, 1.0 - alpha, dst=roi)
    return region, alpha


def darken(
    frame: U8Image, soft_alpha: npt.NDArray[np.uint8], ms: Sequence[Affine], strength: float
) -> None:
    """Multiply the frame by (1 - strength * alpha) where a (blurred) shadow alpha lands."""
    region, warped = warp_into(soft_alpha, frame.shape[:2], ms)
    if warped is None:
        return
    roi = frame[region.y0 : region.y1, region.x0 : region.x1]
    shade = warped.astype(np.float32) * np.float32(strength / 255.0)
    cv2.blendLinear(np.zeros_like(roi), roi, shade, 1.0 - shade, dst=roi)


def alpha_at(sprite_alpha: FloatImage, m: Affine, point: Point) -> float:
    """Coverage of a warped sprite at one frame point (bilinear), without warping the sprite."""
    return alpha_at_inverse(sprite_alpha, invert(m), point)


def alpha_at_inverse(sprite_alpha: FloatImage, inverse: Affine, point: Point) -> float:
    """As :func:`alpha_at`, given the inverse (frame -> sprite) affine."""
    sx, sy = apply(inverse, point)
    h, w = sprite_alpha.shape
    if not (0 <= sx < w - 1 and 0 <= sy < h - 1):
        return 0.0
    x0, y0 = int(sx), int(sy)
    fx, fy = sx - x0, sy - y0
    patch = sprite_alpha[y0 : y0 + 2, x0 : x0 + 2]
    top = patch[0, 0] * (1 - fx) + patch[0, 1] * fx
    bottom = patch[1, 0] * (1 - fx) + patch[1, 1] * fx
    return float(top * (1 - fy) + bottom * fy)
