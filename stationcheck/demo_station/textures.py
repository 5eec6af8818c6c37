"""Procedural surfaces for the demo renderer: bench tops, fabric, sensor noise.

Everything is float32 BGR in [0, 255] and deterministic from the generator passed in. Built from
smooth value noise (random grids resized with bicubic interpolation), which is cheap enough to
make a fresh bench for every training sample.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Literal

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.demo_station.shading import FloatImage, as_f32, as_u8

BenchKind = Literal["wood", "mat", "steel", "painted", "laminate"]
BENCH_KINDS: tuple[BenchKind, ...] = ("wood", "mat", "steel", "painted", "laminate")


def value_noise(
    rng: np.random.Generator, height: int, width: int, cell_px: float, aspect: float = 1.0
) -> FloatImage:
    """Smooth noise in about [-1, 1] with features ``cell_px`` across (``aspect`` stretches x)."""
    gh = max(2, math.ceil(height / cell_px) + 2)
    gw = max(2, math.ceil(width / (cell_px * aspect)) + 2)
    grid = rng.standard_normal((gh, gw)).astype(np.float32)
    big = cv2.resize(
        grid, (int(gw * cell_px * aspect), int(gh * cell_px)), interpolation=cv2.INTER_CUBIC
    )
    oy = int(rng.integers(0, max(1, big.shape[0] - height)))
    ox = int(rng.integers(0, max(1, big.shape[1] - width)))
    return np.ascontiguousarray(big[oy : oy + height, ox : ox + width])


def fbm(
    rng: np.random.Generator,
    height: int,
    width: int,
    cell_px: float,
    octaves: int = 4,
    aspect: float = 1.0,
) -> FloatImage:
    """Fractal sum of value noise octaves, roughly unit variance."""
    out = np.zeros((height, width), np.float32)
    amplitude, total = 1.0, 0.0
    for octave in range(octaves):
        cell = max(1.0, cell_px / (2**octave))
        out += amplitude * value_noise(rng, height, width, cell, aspect)
        total += amplitude**2
        amplitude *= 0.5
    return out / np.float32(math.sqrt(total))


def _tint(gray: FloatImage, bgr: Sequence[float] | npt.NDArray[np.float32]) -> FloatImage:
    """Gray field around 1.0 times a BGR colour, as an H x W x 3 image."""
    return gray[..., None] * np.asarray(bgr, np.float32)[None, None, :]


def wood(rng: np.random.Generator, height: int, width: int, strip_px: float = 46.0) -> FloatImage:
    """Butcher-block bench top: glued strips along x, each with its own tone and grain."""
    base = np.asarray(
        [rng.uniform(70, 110), rng.uniform(118, 150), rng.uniform(165, 205)], np.float32
    )
    ys = np.arange(height, dtype=np.float32)[:, None]
    out = np.empty((height, width, 3), np.float32)
    warp = fbm(rng, height, width, 60.0, 3, aspect=6.0) * 9.0
    fine = fbm(rng, height, width, 2.0, 2, aspect=30.0)
    y0 = -rng.uniform(0, strip_px)
    while y0 < height:
        y1 = y0 + strip_px * rng.uniform(0.75, 1.25)
        a, b = max(0, round(y0)), min(height, round(y1))
        y0 = y1
        if a >= b:
            continue
        freq = rng.uniform(0.25, 0.6)
        phase = rng.uniform(0, 2 * math.pi)
        rings = np.sin((ys[a:b] + warp[a:b]) * freq + phase)
        lines = np.maximum(0.0, np.sin((ys[a:b] + 0.6 * warp[a:b]) * freq * 3.1 + phase)) ** 8
        grain = 1.0 + 0.05 * rings - 0.09 * lines + 0.06 * fine[a:b]
        tone = rng.uniform(0.85, 1.08)
        out[a:b] = _tint(as_f32((grain * tone).astype(np.float32)), base)
        out[a] *= 0.8  # glue line
    mottle = fbm(rng, height, width, 120.0, 2)
    out *= (1.0 + 0.05 * mottle)[..., None]
    return out


def mat(rng: np.random.Generator, height: int, width: int) -> FloatImage:
    """Rubber work mat (dissipative grey-green/blue): fine speckle, faint mottling and scuffs."""
    palette = [(92, 104, 88), (110, 100, 84), (84, 84, 84), (70, 92, 78), (120, 112, 104)]
    bgr = np.asarray(palette[int(rng.integers(len(palette)))], np.float32) * rng.uniform(0.8, 1.2)
    speckle = rng.standard_normal((height, width)).astype(np.float32)
    speckle = as_f32(cv2.GaussianBlur(speckle, (0, 0), 0.7))
    field = 1.0 + 0.06 * speckle + 0.05 * fbm(rng, height, width, 90.0, 3)
    out = _tint(field, bgr)
    _scratches(rng, out, int(rng.integers(5, 25)), lighter=True)
    return out


def steel(rng: np.random.Generator, height: int, width: int) -> FloatImage:
    """Brushed steel plate: long streaks along one direction plus a broad sheen."""
    level = rng.uniform(120, 175)
    streak = fbm(rng, height, width, 2.5, 2, aspect=40.0)
    sheen = fbm(rng, height, width, 200.0, 2)
    field = 1.0 + 0.05 * streak + 0.08 * sheen
    out = _tint(field, (level * 1.02, level, level * 0.97))
    _scratches(rng, out, int(rng.integers(10, 40)), lighter=True)
    return out


def painted(rng: np.random.Generator, height: int, width: int) -> FloatImage:
    """Painted sheet or board in a random colour with orange-peel texture and wear."""
    bgr = rng.uniform(40, 200, 3).astype(np.float32)
    field = 1.0 + 0.025 * fbm(rng, height, width, 4.0, 2) + 0.06 * fbm(rng, height, width, 150, 2)
    out = _tint(field, bgr)
    _scratches(rng, out, int(rng.integers(0, 15)), lighter=True)
    return out


def laminate(rng: np.random.Generator, height: int, width: int) -> FloatImage:
    """Light grey or beige laminate top with a faint speckle pattern."""
    bgr = np.asarray([rng.uniform(150, 205)] * 3, np.float32) * np.asarray(
        [rng.uniform(0.9, 1.0), 1.0, rng.uniform(1.0, 1.08)], np.float32
    )
    dots = (rng.random((height, width)) < 0.02).astype(np.float32)
    dots = cv2.GaussianBlur(dots, (0, 0), 0.8) * 3.0
    field = 1.0 - 0.12 * dots + 0.04 * fbm(rng, height, width, 80, 3)
    return _tint(field, bgr)


def bench(rng: np.random.Generator, height: int, width: int, kind: BenchKind) -> FloatImage:
    makers = {"wood": wood, "mat": mat, "steel": steel, "painted": painted, "laminate": laminate}
    return makers[kind](rng, height, width)


def _scratches(rng: np.random.Generator, image: FloatImage, count: int, lighter: bool) -> None:
    h, w = image.shape[:2]
    layer = np.zeros((h, w), np.float32)
    for _ in range(count):
        x0, y0 = rng.uniform(0, w), rng.uniform(0, h)
        angle = rng.uniform(0, math.pi)
        length = rng.uniform(10, 90)
        x1, y1 = x0 + length * math.cos(angle), y0 + length * math.sin(angle)
        cv2.line(
            layer,
            (int(x0 * 16), int(y0 * 16)),
            (int(x1 * 16), int(y1 * 16)),
            float(rng.uniform(0.3, 1.0)),
            1,
            cv2.LINE_AA,
            4,
        )
    sign = 1.0 if lighter else -1.0
    image *= (1.0 + sign * 0.07 * layer)[..., None]


def fabric(rng: np.random.Generator, height: int, width: int) -> FloatImage:
    """Woven-cloth brightness field around 1.0 (sleeves)."""
    ys, xs = np.mgrid[0:height, 0:width].astype(np.float32)
    weave = 0.5 * (np.sin(xs * 1.9) + np.sin(ys * 1.9))
    field = (
        1.0
        + 0.035 * weave
        + 0.05 * fbm(rng, height, width, 3.0, 2)
        + 0.08 * fbm(rng, height, width, 40.0, 2)
    )
    return as_f32(field.astype(np.float32))


def vignette(height: int, width: int, strength: float) -> FloatImage:
    """Lens fall-off: 1.0 in the centre, ``1 - strength`` in the corners."""
    ys, xs = np.mgrid[0:height, 0:width].astype(np.float32)
    r2 = ((xs - width / 2) / (width / 2)) ** 2 + ((ys - height / 2) / (height / 2)) ** 2
    return as_f32((1.0 - strength * r2 / 2.0).astype(np.float32))


class NoiseBank:
    """Pre-made sensor noise; each frame takes a random crop (fresh noise per frame is slow).

    The bank holds luminance noise (shared by the channels) plus weaker chroma noise, as int16
    so it can be added to a uint8 image with saturation.
    """

    MARGIN_PX = 48

    def __init__(self, rng: np.random.Generator, height: int, width: int, sigma: float) -> None:
        h, w = height + self.MARGIN_PX, width + self.MARGIN_PX
        luma = rng.standard_normal((h, w, 1)).astype(np.float32) * sigma
        chroma = rng.standard_normal((h, w, 3)).astype(np.float32) * (sigma * 0.45)
        chroma = as_f32(cv2.GaussianBlur(chroma, (0, 0), 0.6))
        self._bank = np.round(luma + chroma).astype(np.int16)
        self.height, self.width = height, width

    def crop(self, rng: np.random.Generator) -> npt.NDArray[np.int16]:
        oy = int(rng.integers(0, self.MARGIN_PX))
        ox = int(rng.integers(0, self.MARGIN_PX))
        return self._bank[oy : oy + self.height, ox : ox + self.width]

    def apply(
        self, image_u8: npt.NDArray[np.uint8], rng: np.random.Generator
    ) -> npt.NDArray[np.uint8]:
        noise = self.crop(rng)
        return as_u8(cv2.add(image_u8, noise, dtype=cv2.CV_8U))
