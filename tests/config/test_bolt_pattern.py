"""Bolt circles: the cross tightening order and the zones on the circle.

Outside references: the ASME PCC-1 legacy cross pattern (values from memory), OpenCV's
``ellipse2Poly`` for points on a circle and its angle convention, OpenCV's ``contourArea`` and
``pointPolygonTest`` for the octagon, and the regular-octagon area formula
A = 2 (sqrt(2) - 1) s^2 for width across flats s (standard geometry).
"""

from __future__ import annotations

import itertools
import math

import cv2
import numpy as np
import pytest

from stationcheck.core.bolt_pattern import (
    apply_order,
    bolt_centres_px,
    bolt_circle_zones_px,
    circle_through_px,
    cross_order,
    octagon_px,
)

# ASME PCC-1 legacy cross pattern, bolts numbered clockwise (from memory).
PCC1_LEGACY = {
    4: "1-3-2-4",
    8: "1-5-3-7-2-6-4-8",
    12: "1-7-4-10-2-8-5-11-3-9-6-12",
    16: "1-9-5-13-3-11-7-15-2-10-6-14-4-12-8-16",
    20: "1-11-6-16-3-13-8-18-5-15-10-20-2-12-7-17-4-14-9-19",
}
# Star orders for counts the legacy table does not cover (common practice, no source).
STAR = {5: "1-3-5-2-4", 6: "1-4-2-5-3-6"}


def as_text(order: list[int]) -> str:
    return "-".join(map(str, order))


@pytest.mark.parametrize("count", sorted(PCC1_LEGACY))
def test_matches_the_pcc1_legacy_pattern(count: int) -> None:
    assert as_text(cross_order(count)) == PCC1_LEGACY[count]


@pytest.mark.parametrize("count", sorted(STAR))
def test_matches_the_common_star_order(count: int) -> None:
    assert as_text(cross_order(count)) == STAR[count]


@pytest.mark.parametrize("bits", [2, 3, 4, 5])
def test_powers_of_two_up_to_32_follow_bit_reversal(bits: int) -> None:
    count = 2**bits
    reversed_bits = [int(format(i, f"0{bits}b")[::-1], 2) + 1 for i in range(count)]
    assert cross_order(count) == reversed_bits


@pytest.mark.parametrize("count", range(1, 201))
def test_every_order_is_a_permutation(count: int) -> None:
    order = cross_order(count)
    assert sorted(order) == list(range(1, count + 1))
    assert order[0] == 1


@pytest.mark.parametrize("count", range(5, 201))
def test_consecutive_bolts_are_never_neighbours(count: int) -> None:
    order = cross_order(count)
    for a, b in itertools.pairwise(order):
        gap = abs(a - b) % count
        assert min(gap, count - gap) > 1, (count, a, b)


def test_four_bolts_cannot_avoid_neighbours() -> None:
    # Only 1-3 and 2-4 are not neighbours on a 4-bolt circle, so no order avoids them all.
    assert as_text(cross_order(4)) == "1-3-2-4"


@pytest.mark.parametrize("count", [0, -3])
def test_no_bolts_is_an_error(count: int) -> None:
    with pytest.raises(ValueError, match="at least 1 bolt"):
        cross_order(count)


def test_bolt_centres_follow_opencv_circle_points_clockwise_from_the_start_angle() -> None:
    centre, radius = (320, 215), 68
    reference = cv2.ellipse2Poly(centre, (radius, radius), 0, -90, 270, 60)[:-1]
    ours = np.array(bolt_centres_px(centre, radius, 6, -90.0))
    assert np.abs(ours - reference).max() <= 1.0  # ellipse2Poly rounds to whole pixels
    assert ours[1][0] > centre[0]  # bolt 2 is right of 12 o'clock: clockwise on screen


@pytest.mark.parametrize("size_px", [10.0, 34.0, 61.0])
def test_octagon_area_and_inscribed_radius(size_px: float) -> None:
    octagon = np.array(octagon_px((200.0, 150.0), size_px), dtype=np.float32)
    expected_area = 2 * (math.sqrt(2) - 1) * size_px**2
    assert cv2.contourArea(octagon) == pytest.approx(expected_area, abs=8 * 0.05 * size_px)
    distance = cv2.pointPolygonTest(octagon.reshape(-1, 1, 2), (200.0, 150.0), True)
    assert distance == pytest.approx(size_px / 2, abs=0.06)
    xs, ys = octagon[:, 0], octagon[:, 1]
    assert xs.max() - xs.min() == pytest.approx(size_px, abs=0.1)
    assert ys.max() - ys.min() == pytest.approx(size_px, abs=0.1)


def test_zones_are_centred_on_the_bolts() -> None:
    centres = bolt_centres_px((300.0, 200.0), 90.0, 7, 10.0)
    zones = bolt_circle_zones_px((300.0, 200.0), 90.0, 7, 10.0, 20.0)
    assert len(zones) == 7
    for (cx, cy), zone in zip(centres, zones, strict=True):
        m = cv2.moments(np.array(zone, dtype=np.float32))
        assert (m["m10"] / m["m00"], m["m01"] / m["m00"]) == pytest.approx((cx, cy), abs=0.1)


@pytest.mark.parametrize("start_deg", [-90.0, 0.0, 37.5, 179.0, -135.0])
def test_circle_through_the_first_bolt_gives_back_radius_and_angle(start_deg: float) -> None:
    first = bolt_centres_px((250.0, 180.0), 55.0, 8, start_deg)[0]
    radius, angle = circle_through_px((250.0, 180.0), first)
    assert radius == pytest.approx(55.0)
    assert angle == pytest.approx(start_deg)


def test_circle_through_the_centre_is_an_error() -> None:
    with pytest.raises(ValueError, match="must not sit on the centre"):
        circle_through_px((1.0, 1.0), (1.0, 1.0))


def test_apply_order_rearranges_and_refuses_non_permutations() -> None:
    assert apply_order(["a", "b", "c", "d"], [1, 3, 2, 4]) == ["a", "c", "b", "d"]
    with pytest.raises(ValueError, match="permutation"):
        apply_order(["a", "b"], [1, 1])


@pytest.mark.parametrize(
    ("call", "fragment"),
    [
        (lambda: bolt_centres_px((0, 0), 0.0, 4, 0.0), "radius_px must be > 0"),
        (lambda: bolt_centres_px((0, 0), 5.0, 0, 0.0), "at least 1 bolt"),
        (lambda: octagon_px((0, 0), -1.0), "size_px must be > 0"),
    ],
)
def test_bad_circle_arguments(call: object, fragment: str) -> None:
    with pytest.raises(ValueError, match=fragment):
        call()  # type: ignore[operator]
