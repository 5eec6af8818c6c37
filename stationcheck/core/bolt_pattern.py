"""Bolt circles: fastener positions on a circle and the order to tighten them.

Bolts are numbered 1..N clockwise on screen (image y grows downwards), bolt 1 at the start
angle. Angles are in degrees, 0 at 3 o'clock, growing clockwise on screen, so -90 is
12 o'clock.

:func:`cross_order` follows one rule for every count instead of a lookup table:

* N divisible by 4: tighten four bolts 90 degrees apart at a time, in the order
  ``o, o + N/2, o + N/4, o + 3N/4`` (0-based) for an offset ``o`` in ``0..N/4-1``. The next
  offset is the one furthest (around the circle) from every offset already used; ties go to
  the offset furthest from the group just tightened, then to the lower bolt number. For
  4, 8, 12, 16 and 20 bolts this gives the ASME PCC-1 legacy cross pattern, and for 16 and 32
  the whole order is the bit-reversal permutation.
* Other even N: the same rule with pairs of opposite bolts ``o, o + N/2``. For 6 bolts this is
  1-4-2-5-3-6, a common star order (common practice, no source).
* Odd N: a star that jumps ``(N - 1) / 2`` bolts each time (5 bolts: 1-3-5-2-4). That step is
  coprime with N, so every bolt is visited once.

For N >= 5 two bolts tightened one after the other are never neighbours on the circle; with
4 or fewer bolts that cannot be avoided.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

Point = tuple[float, float]


def cross_order(count: int) -> list[int]:
    """The tightening order of ``count`` bolts as 1-based bolt numbers."""
    if count < 1:
        raise ValueError(f"a bolt circle needs at least 1 bolt, got {count}")
    if count % 2 == 1:
        step = max((count - 1) // 2, 1)
        return [(i * step) % count + 1 for i in range(count)]
    group: tuple[int, ...]
    group = (0, count // 2, count // 4, 3 * count // 4) if count % 4 == 0 else (0, count // 2)
    slots = count // len(group)
    return [bolt + offset + 1 for offset in _spread_offsets(slots) for bolt in group]


def _spread_offsets(slots: int) -> list[int]:
    """Offsets 0..slots-1, each next one as far as possible from those already used."""

    def gap(a: int, b: int) -> int:
        d = abs(a - b) % slots
        return min(d, slots - d)

    order = [0]
    nearest = {o: gap(o, 0) for o in range(1, slots)}  # gap to the closest offset used
    while nearest:
        last = order[-1]
        best = max(nearest, key=lambda o: (nearest[o], gap(o, last), -o))
        order.append(best)
        del nearest[best]
        nearest = {o: min(g, gap(o, best)) for o, g in nearest.items()}
    return order


def bolt_centres_px(
    centre_px: Point, radius_px: float, count: int, start_angle_deg: float
) -> list[Point]:
    """Centres of ``count`` bolts evenly spaced on the circle, bolt 1 first, clockwise."""
    if count < 1:
        raise ValueError(f"a bolt circle needs at least 1 bolt, got {count}")
    if not radius_px > 0:
        raise ValueError(f"radius_px must be > 0, got {radius_px}")
    cx, cy = centre_px
    centres = []
    for i in range(count):
        angle = math.radians(start_angle_deg + 360.0 * i / count)
        centres.append((cx + radius_px * math.cos(angle), cy + radius_px * math.sin(angle)))
    return centres


def octagon_px(centre_px: Point, size_px: float) -> list[Point]:
    """A regular octagon ``size_px`` across its flats, flats along the image axes.

    Vertices run clockwise on screen and are rounded to 0.1 px so they read well in YAML.
    """
    if not size_px > 0:
        raise ValueError(f"size_px must be > 0, got {size_px}")
    cx, cy = centre_px
    corner_px = (size_px / 2.0) / math.cos(math.pi / 8)
    return [
        (
            round(cx + corner_px * math.cos(math.radians(22.5 + 45 * k)), 1),
            round(cy + corner_px * math.sin(math.radians(22.5 + 45 * k)), 1),
        )
        for k in range(8)
    ]


def bolt_circle_zones_px(
    centre_px: Point,
    radius_px: float,
    count: int,
    start_angle_deg: float,
    zone_size_px: float,
) -> list[list[Point]]:
    """One octagonal zone per bolt, bolt 1 first, numbered clockwise."""
    return [
        octagon_px(centre, zone_size_px)
        for centre in bolt_centres_px(centre_px, radius_px, count, start_angle_deg)
    ]


def circle_through_px(centre_px: Point, first_bolt_px: Point) -> tuple[float, float]:
    """Radius and start angle of the circle around ``centre_px`` through bolt 1.

    Lets a user place a bolt circle by clicking its centre and its first bolt.
    """
    dx = first_bolt_px[0] - centre_px[0]
    dy = first_bolt_px[1] - centre_px[1]
    radius_px = math.hypot(dx, dy)
    if radius_px == 0:
        raise ValueError("the first bolt must not sit on the centre of the circle")
    return radius_px, math.degrees(math.atan2(dy, dx))


def apply_order(items: Sequence[str], order: Sequence[int]) -> list[str]:
    """Items listed by bolt number, re-arranged into a 1-based tightening order."""
    if sorted(order) != list(range(1, len(items) + 1)):
        raise ValueError(f"order must be a permutation of 1..{len(items)}, got {list(order)}")
    return [items[number - 1] for number in order]
