"""Things lying around a work bench, drawn as sprites: distractors for training frames.

Each sprite has a ``centre`` point. None of them carries the fastening tool's keypoints; some
(manual screwdriver, marker, other drivers' bits) are deliberately tool-like so a model learns
what the fastening tool is not.
"""

from __future__ import annotations

import math

import cv2
import numpy as np

from stationcheck.demo_station.shading import (
    CHROME,
    CLOTH,
    MATTE,
    RUBBER,
    STEEL,
    Canvas,
    Sprite,
    as_u8,
)

BGR = tuple[float, float, float]
BRIGHT: tuple[BGR, ...] = (
    (40, 40, 200),
    (40, 160, 230),
    (200, 110, 30),
    (40, 150, 40),
    (30, 30, 30),
    (220, 220, 220),
    (130, 60, 150),
    (20, 200, 240),
)


def _colour(rng: np.random.Generator) -> BGR:
    base = BRIGHT[int(rng.integers(len(BRIGHT)))]
    return tuple(float(min(255.0, c * rng.uniform(0.8, 1.15))) for c in base)  # type: ignore[return-value]


def screw(rng: np.random.Generator) -> Sprite:
    r = float(rng.uniform(4, 9))
    length = float(rng.uniform(2, 30)) if rng.random() < 0.6 else 0.0
    c = Canvas(int(2 * r + length + 12), int(2 * r + 12), (r + 6, r + 6))
    if length:
        c.paint(
            c.capsule_mask((0, 0), (length + r * 0.4, 0), r * 0.9), (150, 150, 155), r * 0.45, STEEL
        )
        for x in np.arange(r, length + r * 0.4, 2.2):
            c.darken(c.capsule_mask((x, -r * 0.45), (x + 0.8, r * 0.45), 0.6), 0.6)
    c.paint(c.circle_mask((0, 0), r), (170, 170, 175), r * 0.5, STEEL)
    if rng.random() < 0.5:
        c.darken(c.capsule_mask((-r * 0.5, 0), (r * 0.5, 0), r * 0.22), 0.3)
        c.darken(c.capsule_mask((0, -r * 0.5), (0, r * 0.5), r * 0.22), 0.3)
    else:
        pts = [
            (r * 0.45 * math.cos(math.radians(60 * k)), r * 0.45 * math.sin(math.radians(60 * k)))
            for k in range(6)
        ]
        c.darken(c.polygon_mask(pts), 0.25)
    return c.to_sprite({"centre": (0.0, 0.0)})


def washer(rng: np.random.Generator) -> Sprite:
    r = float(rng.uniform(5, 14))
    c = Canvas(int(2 * r + 8), int(2 * r + 8), (r + 4, r + 4))
    c.paint(c.ring_mask((0, 0), r, r * rng.uniform(0.35, 0.6)), (175, 175, 178), 1.5, STEEL)
    return c.to_sprite({"centre": (0.0, 0.0)})


def hand_screwdriver(rng: np.random.Generator) -> Sprite:
    handle, shaft = float(rng.uniform(60, 110)), float(rng.uniform(40, 110))
    hr = float(rng.uniform(8, 14))
    c = Canvas(int(handle + shaft + 16), int(2 * hr + 12), (8.0, hr + 6))
    c.paint(c.capsule_mask((0, 0), (shaft, 0), 5.0), (190, 190, 195), 2.5, CHROME)
    col = _colour(rng)
    c.paint(c.capsule_mask((shaft, 0), (shaft + handle, 0), 2 * hr), col, hr, MATTE)
    for k in range(4):
        y = -hr * 0.6 + k * hr * 0.4
        c.darken(c.capsule_mask((shaft + 10, y), (shaft + handle - 10, y), 1.6), 0.65)
    return c.to_sprite({"centre": ((shaft + handle) / 2, 0.0)})


def wrench(rng: np.random.Generator) -> Sprite:
    length = float(rng.uniform(90, 170))
    w = float(rng.uniform(9, 15))
    c = Canvas(int(length + 4 * w), int(4 * w), (2 * w, 2 * w))
    c.paint(c.capsule_mask((0, 0), (length, 0), w), (165, 165, 170), 2.0, CHROME)
    c.paint(c.circle_mask((0, 0), w * 1.5), (165, 165, 170), 2.0, CHROME)
    c.paint(c.ring_mask((length, 0), w * 1.4, w * 0.8), (165, 165, 170), 2.0, CHROME)
    jaw = [(-w * 0.4, -w * 0.6), (-w * 2, -w * 0.9), (-w * 2, w * 0.9), (-w * 0.4, w * 0.6)]
    mask = c.polygon_mask(jaw)
    c.rgb[mask > 0] = 0
    c.alpha[mask > 0] = 0
    return c.to_sprite({"centre": (length / 2, 0.0)})


def pliers(rng: np.random.Generator) -> Sprite:
    length = float(rng.uniform(110, 170))
    spread = float(rng.uniform(8, 22))
    col = _colour(rng)
    c = Canvas(int(length + 30), int(2 * spread + 40), (10.0, spread + 20))
    c.paint(c.polygon_mask([(0, -3), (40, -7), (40, 7), (0, 3)]), (150, 150, 155), 3.0, STEEL)
    c.paint(c.circle_mask((42, 0), 7), (140, 140, 145), 3.0, STEEL)
    for sign in (-1, 1):
        c.paint(c.capsule_mask((48, sign * 3.0), (length, sign * spread), 11), col, 5.5, RUBBER)
    return c.to_sprite({"centre": (length / 2, 0.0)})


def marker(rng: np.random.Generator) -> Sprite:
    length = float(rng.uniform(90, 140))
    c = Canvas(int(length + 12), 26, (6.0, 13.0))
    c.paint(c.capsule_mask((0, 0), (length, 0), 14), (230, 230, 232), 7.0, MATTE)
    c.paint(c.capsule_mask((length * 0.72, 0), (length, 0), 16), _colour(rng), 8.0, MATTE)
    return c.to_sprite({"centre": (length / 2, 0.0)})


def cable(rng: np.random.Generator) -> Sprite:
    n = 30
    heading = np.cumsum(rng.normal(0, 0.22, n)) + rng.uniform(0, 2 * math.pi)
    pts = np.cumsum(np.stack([np.cos(heading), np.sin(heading)], axis=1) * 7.0, axis=0)
    pts = pts - pts.mean(axis=0)
    span = np.abs(pts).max(axis=0) + 12
    c = Canvas(int(2 * span[0]), int(2 * span[1]), (float(span[0]), float(span[1])))
    width = float(rng.uniform(4, 10))
    mask = c.empty_mask()
    cv2.polylines(
        mask,
        [np.asarray([c.ss((float(x), float(y))) for x, y in pts], np.int32)],
        False,
        255,
        int(width * 3),
        cv2.LINE_8,
    )
    c.paint(mask, _colour(rng) if rng.random() < 0.5 else (35, 35, 35), width / 2, RUBBER)
    return c.to_sprite({"centre": (0.0, 0.0)})


def paper(rng: np.random.Generator) -> Sprite:
    w, h = float(rng.uniform(80, 190)), float(rng.uniform(60, 250))
    c = Canvas(int(w + 6), int(h + 6), (3.0, 3.0))
    c.paint(c.polygon_mask([(0, 0), (w, 0), (w, h), (0, h)]), (228, 232, 235), 1.0, CLOTH)
    for y in np.arange(12, h - 10, rng.uniform(8, 14)):
        x1 = w * rng.uniform(0.3, 0.9)
        c.darken(c.capsule_mask((10, y), (x1, y), 1.3), 0.55)
    return c.to_sprite({"centre": (w / 2, h / 2)})


def part_disc(rng: np.random.Generator) -> Sprite:
    r = float(rng.uniform(25, 90))
    c = Canvas(int(2 * r + 8), int(2 * r + 8), (r + 4, r + 4))
    grey = float(rng.uniform(110, 200))
    c.paint(c.circle_mask((0, 0), r), (grey, grey, grey * 1.02), 4.0, STEEL)
    c.darken(c.circle_mask((0, 0), r * rng.uniform(0.15, 0.4)), 0.3, 1.0)
    holes = int(rng.integers(0, 8))
    for k in range(holes):
        a = 2 * math.pi * k / max(1, holes)
        c.darken(c.circle_mask((0.72 * r * math.cos(a), 0.72 * r * math.sin(a)), r * 0.07), 0.25)
    return c.to_sprite({"centre": (0.0, 0.0)})


def o_ring(rng: np.random.Generator) -> Sprite:
    a, b = float(rng.uniform(20, 55)), float(rng.uniform(15, 55))
    c = Canvas(int(2 * a + 10), int(2 * b + 10), (a + 5, b + 5))
    outer = c.ellipse_mask((0, 0), (a, b), 0)
    inner = c.ellipse_mask((0, 0), (a - 4, b - 4), 0)
    c.paint(as_u8(cv2.subtract(outer, inner)), (38, 38, 40), 2.0, RUBBER)
    return c.to_sprite({"centre": (0.0, 0.0)})


MAKERS = (
    screw,
    screw,
    washer,
    hand_screwdriver,
    wrench,
    pliers,
    marker,
    cable,
    paper,
    part_disc,
    o_ring,
)
