"""The still parts of the demo station (demo data), drawn from :mod:`layout`.

Bench, fixture plate, pump housing, bins with parts and the locking pin block make one base
image drawn once. What changes with the unit (O-ring laid in, cover placed, each screw loose or
seated, pin engaged or pulled) is a set of small overlays, so the still image of any
:class:`StationState` is assembled in a few milliseconds and cached.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import cv2
import numpy as np

from stationcheck.demo_station import compositor as comp
from stationcheck.demo_station import layout, textures
from stationcheck.demo_station.shading import (
    CHROME,
    MATTE,
    RUBBER,
    STEEL,
    Canvas,
    Material,
    Sprite,
    as_f32,
    as_u8,
)

Stage = Literal["empty", "gasket", "cover"]
ScrewLook = Literal["loose", "seated"]
U8Image = comp.U8Image
SEATED: ScrewLook = "seated"
LOOSE: ScrewLook = "loose"
ALL_SEATED: tuple[ScrewLook, ...] = (SEATED,) * layout.BOLT_COUNT
ALL_LOOSE: tuple[ScrewLook, ...] = (LOOSE,) * layout.BOLT_COUNT

CAST = Material(ambient=0.5, diffuse=0.55, specular=0.12, shininess=12.0)
MACHINED = Material(ambient=0.45, diffuse=0.5, specular=0.35, shininess=22.0, metal=0.25)
BIN_PLASTIC = Material(ambient=0.5, diffuse=0.6, specular=0.12, shininess=14.0)
PLATE_PX = (190.0, 88.0, 484.0, 374.0)
PIN_X_PX = (layout.LOCKING_PIN_ZONE_PX[0] + layout.LOCKING_PIN_ZONE_PX[2]) / 2.0
PIN_TRAVEL_PX = 34.0


@dataclass(frozen=True)
class StationState:
    """What the still image shows: the unit's stage, each screw's look, the pin."""

    stage: Stage = "cover"
    screws: tuple[ScrewLook, ...] = ALL_SEATED
    pin_engaged: bool = True

    def __post_init__(self) -> None:
        if len(self.screws) != layout.BOLT_COUNT:
            raise ValueError(
                f"StationState.screws needs {layout.BOLT_COUNT} entries, got {len(self.screws)}"
            )


REFERENCE_STATE = StationState()


class StationScene:
    """Builds the base image once; assembles and caches the still image of any state."""

    def __init__(self, seed: int = 2024, bench: textures.BenchKind = "wood") -> None:
        rng = np.random.default_rng(seed)
        h, w = layout.FRAME_HEIGHT_PX, layout.FRAME_WIDTH_PX
        base = textures.bench(rng, h, w, bench)
        self._base = np.clip(base, 0, 255).astype(np.uint8)
        self._draw_plate(rng)
        self._paste(_bin_sprite(rng, layout.LEFT_BIN_PX, "gaskets"), shadow=True)
        self._paste(_bin_sprite(rng, layout.RIGHT_BIN_PX, "covers"), shadow=True)
        self._paste(_housing_sprite(rng), shadow=True)
        self._paste(_pin_block_sprite(rng), shadow=True)
        self._face = _housing_face_sprite(rng)
        self._gasket = _gasket_sprite()
        self._cover = _cover_sprite(rng)
        self._screw = {"loose": _screw_sprite("loose"), "seated": _screw_sprite("seated")}
        self._pin = {True: _pin_sprite(True), False: _pin_sprite(False)}
        self._cache: dict[StationState, U8Image] = {}
        self._shadows: ShadowCache = {}

    def image(self, state: StationState) -> U8Image:
        """The still image (uint8 BGR, no lighting or noise yet) of a state; do not modify."""
        cached = self._cache.get(state)
        if cached is not None:
            return cached
        out = self._base.copy()
        _place(out, self._face)
        if state.stage in ("gasket", "cover"):
            _place(out, self._gasket)
        if state.stage == "cover":
            _place(out, self._cover, shadow=0.35, cache=self._shadows)
            for look, pos in zip(state.screws, layout.screw_positions(), strict=True):
                sprite = self._screw[look]
                cx, cy = sprite.points["centre"]
                m = comp.pose_affine((cx, cy), (pos.x_px, pos.y_px), 0.0)
                _blend_with_shadow(
                    out,
                    sprite,
                    m,
                    0.55 if look == "loose" else 0.3,
                    5.0 if look == "loose" else 1.0,
                    self._shadows,
                )
        _place(out, self._pin[state.pin_engaged], shadow=0.35, cache=self._shadows)
        if len(self._cache) > 64:
            self._cache.clear()
        self._cache[state] = out
        return out

    def part(self, kind: str) -> tuple[Sprite, tuple[float, float]]:
        """A loose part (``gasket`` or ``cover``) and its centre in sprite pixels."""
        sprite = self._gasket if kind == "gasket" else self._cover
        ox, oy = sprite.points["origin"]
        cx, cy = layout.COVER_CENTRE_PX
        return sprite, (ox + cx, oy + cy)

    def _paste(self, sprite: Sprite, shadow: bool) -> None:
        _place(self._base, sprite, shadow=0.4 if shadow else 0.0)

    def _draw_plate(self, rng: np.random.Generator) -> None:
        x0, y0, x1, y1 = PLATE_PX
        canvas = Canvas(int(x1 - x0) + 8, int(y1 - y0) + 8, (4.0 - x0, 4.0 - y0))
        field = textures.steel(rng, canvas.alpha.shape[0] // 3, canvas.alpha.shape[1] // 3)[..., 1]
        field = field / float(field.mean())
        canvas.paint(
            canvas.rounded_rect_mask(x0, y0, x1, y1, 10),
            canvas.albedo_field((150, 152, 150), field),
            3.0,
            STEEL,
        )
        for bx, by in (
            (x0 + 14, y0 + 14),
            (x1 - 14, y0 + 14),
            (x0 + 14, y1 - 14),
            (x1 - 14, y1 - 14),
        ):
            canvas.darken(canvas.circle_mask((bx, by), 7.5), 0.55, 0.6)
            canvas.paint(canvas.circle_mask((bx, by), 6.0), (95, 95, 98), 2.5, STEEL)
            canvas.darken(_hex_mask(canvas, (bx, by), 2.6), 0.3)
        sprite = canvas.to_sprite({"origin": (0.0, 0.0)})
        self._paste(sprite, shadow=True)
        label = self._base
        cv2.putText(
            label,
            "DEMO FIXTURE 01",
            (int(x0) + 26, int(y1) - 10),
            cv2.FONT_HERSHEY_PLAIN,
            0.8,
            (70, 72, 74),
            1,
            cv2.LINE_AA,
        )


def _place(
    frame: U8Image, sprite: Sprite, shadow: float = 0.0, cache: ShadowCache | None = None
) -> None:
    """Paste a sprite drawn in frame coordinates (its ``origin`` point is frame (0, 0))."""
    ox, oy = sprite.points["origin"]
    m = comp.pose_affine((ox, oy), (0.0, 0.0), 0.0)
    _blend_with_shadow(frame, sprite, m, shadow, 4.0, cache)


ShadowCache = dict[tuple[int, float], tuple[Sprite, U8Image, int]]


def _blend_with_shadow(
    frame: U8Image,
    sprite: Sprite,
    m: comp.Affine,
    shadow: float,
    height_px: float,
    cache: ShadowCache | None = None,
) -> None:
    if shadow > 0:
        key = (id(sprite), height_px)
        cached = cache.get(key) if cache is not None else None
        if cached is None or cached[0] is not sprite:
            pad = int(3 * height_px) + 2
            alpha = cv2.copyMakeBorder(
                sprite.bgra[..., 3], pad, pad, pad, pad, cv2.BORDER_CONSTANT, value=0
            )
            cached = (sprite, as_u8(cv2.GaussianBlur(alpha, (0, 0), 0.6 * height_px + 0.5)), pad)
            if cache is not None:
                cache[key] = cached
        _, soft, pad = cached
        sm = comp.compose(
            m, np.asarray([[1.0, 0, -pad + 0.5 * height_px], [0, 1.0, -pad + 0.8 * height_px]])
        )
        comp.darken(frame, soft, [sm], shadow)
    comp.blend(frame, sprite, [m])


def _frame_canvas(x0: float, y0: float, x1: float, y1: float, margin: float = 6.0) -> Canvas:
    """A canvas whose local coordinates are frame coordinates over a box."""
    return Canvas(int(x1 - x0 + 2 * margin), int(y1 - y0 + 2 * margin), (margin - x0, margin - y0))


def _origin_sprite(canvas: Canvas) -> Sprite:
    return canvas.to_sprite({"origin": (0.0, 0.0)})


def _hex_mask(canvas: Canvas, centre: tuple[float, float], radius_px: float) -> np.ndarray:
    pts = [
        (
            centre[0] + radius_px * math.cos(math.radians(30 + 60 * k)),
            centre[1] + radius_px * math.sin(math.radians(30 + 60 * k)),
        )
        for k in range(6)
    ]
    return canvas.polygon_mask(pts)


def _housing_sprite(rng: np.random.Generator) -> Sprite:
    cx, cy = layout.COVER_CENTRE_PX
    r = layout.COVER_RADIUS_PX + 10.0
    canvas = _frame_canvas(cx - r, cy - r, cx + r, cy + r)
    field = 1.0 + 0.06 * textures.fbm(rng, 90, 90, 6.0, 3)
    canvas.paint(
        canvas.circle_mask((cx, cy), r), canvas.albedo_field((112, 120, 126), field), 6.0, CAST
    )
    for k in range(4):  # cast lugs clamped by the fixture
        a = math.radians(45 + 90 * k)
        lug = (cx + (r + 2) * math.cos(a), cy + (r + 2) * math.sin(a))
        canvas.paint(
            canvas.circle_mask(lug, 9.0), canvas.albedo_field((108, 116, 122), field), 4.0, CAST
        )
    return _origin_sprite(canvas)


def _housing_face_sprite(rng: np.random.Generator) -> Sprite:
    """Machined face of the housing with the bore, the O-ring groove and six tapped holes."""
    cx, cy = layout.COVER_CENTRE_PX
    r = layout.COVER_RADIUS_PX - 1.0
    canvas = _frame_canvas(cx - r, cy - r, cx + r, cy + r)
    rings = _turned_field(canvas, (cx, cy), rng)
    canvas.paint(
        canvas.circle_mask((cx, cy), r), canvas.albedo_field((170, 172, 172), rings), 2.0, MACHINED
    )
    canvas.darken(canvas.ring_mask((cx, cy), 53.0, 47.0), 0.45, 0.5)
    canvas.darken(canvas.circle_mask((cx, cy), 31.0), 0.25, 2.0)
    canvas.paint(canvas.ring_mask((cx, cy), 32.0, 29.0), (150, 150, 150), 1.0, MACHINED)
    for pos in layout.screw_positions():
        canvas.darken(canvas.circle_mask((pos.x_px, pos.y_px), 4.2), 0.2, 0.4)
        canvas.darken(canvas.ring_mask((pos.x_px, pos.y_px), 5.2, 4.2), 0.7)
    return _origin_sprite(canvas)


def _turned_field(
    canvas: Canvas, centre: tuple[float, float], rng: np.random.Generator
) -> np.ndarray:
    """Concentric tool marks of a turned face (brightness around 1)."""
    h, w = canvas.alpha.shape[0] // 3, canvas.alpha.shape[1] // 3
    ys, xs = np.mgrid[0:h, 0:w].astype(np.float32)
    ox, oy = canvas.origin_px
    r = np.hypot(xs - (centre[0] + ox), ys - (centre[1] + oy))
    marks = 0.04 * np.sin(r * 2.9) + 0.02 * np.sin(r * 7.3 + 1.0)
    sheen = 0.08 * np.cos(np.arctan2(ys - (centre[1] + oy), xs - (centre[0] + ox)) * 2.0 + 0.6)
    return as_f32(
        (1.0 + marks + sheen + 0.02 * textures.value_noise(rng, h, w, 4.0)).astype(np.float32)
    )


def _gasket_sprite() -> Sprite:
    cx, cy = layout.COVER_CENTRE_PX
    canvas = _frame_canvas(cx - 56, cy - 56, cx + 56, cy + 56)
    canvas.paint(canvas.ring_mask((cx, cy), 52.5, 47.5), (38, 38, 40), 2.5, RUBBER)
    return _origin_sprite(canvas)


def _cover_sprite(rng: np.random.Generator) -> Sprite:
    cx, cy = layout.COVER_CENTRE_PX
    r = layout.COVER_RADIUS_PX
    canvas = _frame_canvas(cx - r, cy - r, cx + r, cy + r)
    rings = _turned_field(canvas, (cx, cy), rng)
    canvas.paint(
        canvas.circle_mask((cx, cy), r), canvas.albedo_field((176, 180, 182), rings), 4.0, MACHINED
    )
    canvas.darken(canvas.ring_mask((cx, cy), r - 5.0, r - 6.2), 0.75)
    boss = canvas.circle_mask((cx, cy), 36.0)
    canvas.paint(boss, canvas.albedo_field((160, 166, 170), rings), 5.0, CAST)
    canvas.paint(canvas.circle_mask((cx, cy), 14.0), (120, 124, 128), 3.0, MACHINED)
    canvas.darken(canvas.circle_mask((cx, cy), 6.0), 0.4, 0.8)
    cv2.putText(
        canvas.rgb,
        "DEMO",
        canvas.ss((cx - 19, cy - 18)),
        cv2.FONT_HERSHEY_SIMPLEX,
        0.35 * 3,
        (110, 112, 116),
        3,
        cv2.LINE_AA,
    )
    for pos in layout.screw_positions():
        canvas.darken(canvas.circle_mask((pos.x_px, pos.y_px), 9.4), 0.5, 0.5)
    return _origin_sprite(canvas)


def _screw_sprite(look: ScrewLook) -> Sprite:
    """A black-oxide socket head cap screw seen from above. A seated one sits flush in its
    counterbore; a loose one stands proud: slightly larger, a lit rim, a longer shadow."""
    loose = look == "loose"
    r = layout.SCREW_HEAD_RADIUS_PX + (0.7 if loose else 0.0)
    canvas = Canvas(30, 30, (15.0, 15.0))
    canvas.paint(canvas.circle_mask((0, 0), r), (78, 78, 82), 2.2 if loose else 1.4, STEEL)
    if loose:
        canvas.paint(
            canvas.ring_mask((0, 0), r, r - 1.1), (170, 170, 176), 0.8, CHROME, opacity=0.8
        )
    canvas.darken(_hex_mask(canvas, (0.0, 0.0), 3.4), 0.18, 0.25)
    canvas.darken(canvas.ring_mask((0, 0), 3.6, 3.1), 0.7)
    return canvas.to_sprite({"centre": (0.0, 0.0)})


def _pin_block_sprite(rng: np.random.Generator) -> Sprite:
    """Locking block with the pin's channel (inside the check zone) and the plunger housing."""
    zx0, zy0, zx1, zy1 = layout.LOCKING_PIN_ZONE_PX
    canvas = _frame_canvas(zx0 - 4, zy0 - 6, zx1 + 4, zy1 + 26)
    field = 1.0 + 0.05 * textures.fbm(rng, 80, 80, 3.0, 2, aspect=6.0)
    canvas.paint(
        canvas.rounded_rect_mask(zx0 + 2, zy0 - 2, zx1 - 2, zy1 - 2, 3),
        canvas.albedo_field((128, 130, 132), field),
        3.0,
        STEEL,
    )
    canvas.darken(
        canvas.rounded_rect_mask(PIN_X_PX - 7.5, zy0 + 1, PIN_X_PX + 7.5, zy1 + 2, 2), 0.22, 0.4
    )
    canvas.paint(
        canvas.rounded_rect_mask(PIN_X_PX - 14, zy1 - 1, PIN_X_PX + 14, zy1 + 18, 3),
        (58, 58, 62),
        4.0,
        MATTE,
    )
    return _origin_sprite(canvas)


def _pin_sprite(engaged: bool) -> Sprite:
    """The plunger pin and its knob: pushed into the channel, or pulled out towards the operator."""
    zx0, zy0, zx1, zy1 = layout.LOCKING_PIN_ZONE_PX
    shift = 0.0 if engaged else PIN_TRAVEL_PX
    canvas = _frame_canvas(zx0, zy0, zx1, zy1 + 70)
    top = zy0 + 3 + shift
    knob_y = zy1 + 26 + shift
    canvas.paint(
        canvas.rounded_rect_mask(PIN_X_PX - 5.5, top, PIN_X_PX + 5.5, knob_y, 3),
        (200, 200, 205),
        5.5,
        CHROME,
    )
    if not engaged:  # the housing still covers the middle of the pin
        canvas.paint(
            canvas.rounded_rect_mask(PIN_X_PX - 14, zy1 - 1, PIN_X_PX + 14, zy1 + 18, 3),
            (58, 58, 62),
            4.0,
            MATTE,
        )
    canvas.paint(
        canvas.ellipse_mask((PIN_X_PX, knob_y + 6), (12.0, 9.0), 0), (40, 40, 160), 8.0, MATTE
    )
    return _origin_sprite(canvas)


def _bin_sprite(
    rng: np.random.Generator, box: tuple[float, float, float, float], contents: str
) -> Sprite:
    x0, y0, x1, y1 = box
    canvas = _frame_canvas(x0, y0, x1, y1)
    blue = (150, 96, 38)
    canvas.paint(canvas.rounded_rect_mask(x0, y0, x1, y1, 6), blue, 4.0, BIN_PLASTIC)
    wall = 9.0
    floor = canvas.rounded_rect_mask(x0 + wall, y0 + wall, x1 - wall, y1 - wall, 4)
    canvas.paint(floor, tuple(c * 0.72 for c in blue), 1.0, BIN_PLASTIC)
    # inner walls: the ones facing the light (right, bottom) brighter, the others in shade
    canvas.darken(
        canvas.polygon_mask(
            [
                (x0 + wall, y0 + wall),
                (x1 - wall, y0 + wall),
                (x1 - wall - 6, y0 + wall + 8),
                (x0 + wall + 6, y0 + wall + 8),
            ]
        ),
        0.7,
        1.5,
    )
    canvas.darken(
        canvas.polygon_mask(
            [
                (x0 + wall, y0 + wall),
                (x0 + wall + 6, y0 + wall + 8),
                (x0 + wall + 6, y1 - wall - 8),
                (x0 + wall, y1 - wall),
            ]
        ),
        0.75,
        1.5,
    )
    if contents == "gaskets":
        for _ in range(9):
            c = (rng.uniform(x0 + 38, x1 - 38), rng.uniform(y0 + 40, y1 - 40))
            axes = (rng.uniform(34, 48), rng.uniform(22, 46))
            ang = rng.uniform(0, 180)
            outer = canvas.ellipse_mask(c, axes, ang)
            inner = canvas.ellipse_mask(c, (axes[0] - 4.5, axes[1] - 4.5), ang)
            ring = cv2.subtract(outer, inner)
            ring = cv2.bitwise_and(ring, floor)
            canvas.paint(as_u8(ring), (36, 36, 38), 2.2, RUBBER)
    else:
        n = 6
        for k in range(n):
            cxk = x0 + wall + 12 + k * (x1 - x0 - 2 * wall - 24) / (n - 1)
            c = (cxk + rng.uniform(-1.5, 1.5), (y0 + y1) / 2 + rng.uniform(-3, 3))
            disc = cv2.bitwise_and(canvas.ellipse_mask(c, (7.5, 78.0), rng.uniform(-2, 2)), floor)
            canvas.paint(as_u8(disc), (178, 182, 186), 4.0, MACHINED)
            canvas.darken(
                canvas.capsule_mask((c[0] + 4.5, c[1] - 70), (c[0] + 4.5, c[1] + 70), 1.2), 0.7
            )
    return _origin_sprite(canvas)
