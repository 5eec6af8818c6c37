"""The operator's right hand (gripping the tool) and forearm with a sleeve, as sprites.

The fist and wrist are drawn in the tool's local frame (tip at the origin, axis along +x) around
the tool's grip point, so they move with the tool. The forearm has its own frame: the wrist end
at the origin, +x towards the elbow; the renderer turns it towards an elbow below the frame.
The wrist sits under the tool (the tool's rear rises above it), the fist over it.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from stationcheck.demo_station import textures
from stationcheck.demo_station.shading import (
    CLOTH,
    RUBBER,
    SKIN,
    SUPERSAMPLE,
    Canvas,
    FloatImage,
    Point,
    Sprite,
)

BGR = tuple[float, float, float]
FOREARM_LENGTH_PX = 560.0


@dataclass(frozen=True)
class ArmStyle:
    skin_bgr: BGR = (120, 144, 184)
    sleeve_bgr: BGR = (92, 62, 40)  # navy work jacket
    glove_bgr: BGR | None = None  # a gloved hand, when set
    sleeve_start_px: float = 22.0  # bare wrist before the cuff
    hand_scale: float = 1.0


DEMO_ARM = ArmStyle()

SKIN_TONES: tuple[BGR, ...] = (
    (118, 148, 196),
    (100, 132, 182),
    (84, 112, 160),
    (62, 86, 128),
    (48, 66, 100),
    (140, 168, 210),
)
SLEEVE_COLOURS: tuple[BGR, ...] = (
    (92, 62, 40),
    (60, 60, 62),
    (40, 40, 120),
    (120, 110, 100),
    (30, 90, 30),
    (150, 150, 150),
    (30, 30, 34),
    (40, 120, 200),
)
GLOVE_COLOURS: tuple[BGR, ...] = ((200, 120, 40), (40, 40, 42), (170, 170, 165), (60, 170, 220))


def random_arm_style(rng: np.random.Generator) -> ArmStyle:
    glove = GLOVE_COLOURS[int(rng.integers(len(GLOVE_COLOURS)))] if rng.random() < 0.3 else None
    return ArmStyle(
        skin_bgr=SKIN_TONES[int(rng.integers(len(SKIN_TONES)))],
        sleeve_bgr=SLEEVE_COLOURS[int(rng.integers(len(SLEEVE_COLOURS)))],
        glove_bgr=glove,
        sleeve_start_px=float(rng.uniform(20, 120)),
        hand_scale=float(rng.uniform(0.9, 1.12)),
    )


def _skin_albedo(canvas: Canvas, style: ArmStyle, rng: np.random.Generator) -> FloatImage:
    h, w = canvas.alpha.shape
    base = np.asarray(style.glove_bgr or style.skin_bgr, np.float32)
    field = 1.0 + 0.05 * textures.fbm(rng, h, w, 18.0 * SUPERSAMPLE, 3)
    field += 0.012 * textures.value_noise(rng, h, w, 1.5 * SUPERSAMPLE)  # pores, fine mottling
    colour = field[..., None] * base[None, None, :]
    if style.glove_bgr is None:  # blotchy redness of skin
        red = 0.025 * textures.fbm(rng, h, w, 10.0 * SUPERSAMPLE, 2)
        colour[..., 2] *= 1.0 + red
        colour[..., 0] *= 1.0 - red
    return colour.astype(np.float32)


def _hand_material(style: ArmStyle):  # type: ignore[no-untyped-def]
    return RUBBER if style.glove_bgr is not None else SKIN


def make_fist_sprites(
    grip: Point, tool_radius_px: float, style: ArmStyle = DEMO_ARM, seed: int = 7
) -> tuple[Sprite, Sprite]:
    """(wrist under the tool, fist over the tool) in a canvas whose origin is the tool tip.

    Both canvases share size and origin with each other; their ``origin`` point marks the tip.
    """
    rng = np.random.default_rng(seed)
    gx, _ = grip
    r = tool_radius_px
    s = style.hand_scale
    width, height = int(gx + 190), int(2 * (r + 110))
    origin = (0.0, height / 2.0)
    material = _hand_material(style)

    def fingers_y(v: float) -> float:
        return v * s

    wrist = Canvas(width, height, origin)
    albedo = _skin_albedo(wrist, style, rng)
    wrist_a, wrist_b = (gx + 26 * s, -r - 16 * s), (gx + 80 * s, -r - 30 * s)
    wrist.paint(wrist.capsule_mask(wrist_a, wrist_b, 54 * s), albedo, 24 * s, material)

    fist = Canvas(width, height, origin)
    palm_c = (gx + 8 * s, -r - 10 * s)
    fist.paint(fist.ellipse_mask(palm_c, (46 * s, 30 * s), -12), albedo, 20 * s, material)
    widths = (13.0, 15.0, 16.0, 16.5)
    for i, fw in enumerate(widths):
        x = gx - 28 * s + 17.5 * s * i
        a = (x, fingers_y(-r - 16))
        b = (x + 4 * s, fingers_y(r + 3 + 1.5 * i))
        fist.paint(fist.capsule_mask(a, b, fw * s), albedo, fw * s * 0.5, material)
        for t in (0.3, 0.62):  # finger joints
            jx, jy = a[0] + (b[0] - a[0]) * t, a[1] + (b[1] - a[1]) * t
            half = 0.36 * fw * s
            fist.darken(fist.capsule_mask((jx - half, jy), (jx + half, jy + 0.5), 1.1), 0.8, 0.4)
        if style.glove_bgr is None:  # a fingernail at the curled end
            fist.paint(
                fist.ellipse_mask((b[0] + 0.5, b[1] + 1.5), (4.2 * s, 3.0 * s), 90),
                np.asarray(style.skin_bgr, np.float32) * 1.12,
                2.0,
                SKIN,
                opacity=0.6,
            )
    thumb_a, thumb_b = (gx + 40 * s, -r - 16 * s), (gx + 26 * s, r - 1 * s)
    fist.paint(fist.capsule_mask(thumb_a, thumb_b, 18 * s), albedo, 9 * s, material)
    points = {
        "tip_origin": (0.0, 0.0),
        "reach": (gx - 38 * s, -r * 0.2),
        "wrist": ((wrist_a[0] + wrist_b[0]) / 2, (wrist_a[1] + wrist_b[1]) / 2),
    }
    return wrist.to_sprite(points), fist.to_sprite(points)


def make_forearm_sprite(style: ArmStyle = DEMO_ARM, seed: int = 11) -> Sprite:
    """Wrist end at the origin, +x towards the elbow; sleeve from ``sleeve_start_px`` on."""
    rng = np.random.default_rng(seed)
    s = style.hand_scale
    length = FOREARM_LENGTH_PX
    height = int(150 * s)
    canvas = Canvas(int(length + 30), height, (10.0, height / 2.0))
    albedo = _skin_albedo(canvas, style, rng)
    canvas.paint(
        canvas.polygon_mask(
            [
                (0, -27 * s),
                (style.sleeve_start_px + 20, -31 * s),
                (style.sleeve_start_px + 20, 31 * s),
                (0, 27 * s),
            ]
        ),
        albedo,
        26 * s,
        _hand_material(style),
    )
    h, w = canvas.alpha.shape
    cloth = textures.fabric(rng, h, w)
    sleeve_albedo = cloth[..., None] * np.asarray(style.sleeve_bgr, np.float32)[None, None, :]
    x0 = style.sleeve_start_px
    sleeve = canvas.polygon_mask(
        [
            (x0, -40 * s),
            (x0 + 14, -42 * s),
            (length, -50 * s),
            (length, 50 * s),
            (x0 + 14, 42 * s),
            (x0, 40 * s),
        ]
    )
    canvas.paint(sleeve, sleeve_albedo.astype(np.float32), 36 * s, CLOTH)
    canvas.darken(canvas.capsule_mask((x0 + 12, -40 * s), (x0 + 12, 40 * s), 2.0), 0.7, 1.0)
    for _ in range(5):  # folds
        fx = x0 + rng.uniform(30, 260)
        fy = rng.uniform(-25, 25) * s
        canvas.darken(
            canvas.capsule_mask((fx, fy - 14), (fx + rng.uniform(20, 60), fy + 10), 3.0), 0.8, 2.5
        )
    return canvas.to_sprite({"wrist": (0.0, 0.0), "elbow": (length, 0.0)})
