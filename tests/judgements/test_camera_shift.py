"""Camera shift: estimated transforms against known ones, and the moved/in-place state.

Two outside references: the demo renderer's camera transform (the frames are drawn with a
known shift and rotation) and OpenCV's own ``cv2.findHomography`` (RANSAC) on synthetic point
sets with noise and outliers.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import cv2
import numpy as np
import pytest

from stationcheck.config.judgement_settings import CameraShiftSettings
from stationcheck.core.plan import ZoneSpec
from stationcheck.demo_station.camera import CameraTransform
from stationcheck.judgements.camera_shift import (
    BLIND_S,
    FULL_SCALE,
    SCALE,
    CameraShiftJudge,
    ReferenceView,
    ShiftEstimate,
    apply_matrix,
    displacement_px,
    fit_similarity,
    remap_zones,
)
from stationcheck.judgements.zone_window import U8Array
from tests.judgements.conftest import Render, reach_into, true_shift_px


def similarity(dx: float, dy: float, rot_deg: float, scale: float = 1.0,
               centre: tuple[float, float] = (319.5, 239.5)) -> np.ndarray:
    a = math.radians(rot_deg)
    r = scale * np.array([[math.cos(a), -math.sin(a)], [math.sin(a), math.cos(a)]])
    c = np.asarray(centre)
    return np.hstack([r, (c - r @ c + (dx, dy)).reshape(2, 1)])


POINT_SETS = [
    pytest.param(similarity(0, 0, 0), 0.0, id="no move"),
    pytest.param(similarity(6.0, -3.0, 0), 0.3, id="shift, 30 % outliers"),
    pytest.param(similarity(10.0, -7.0, 1.1), 0.3, id="the demo nudge, 30 % outliers"),
    pytest.param(similarity(-4.0, 12.0, -3.0, 1.02), 0.5, id="turn and zoom, 50 % outliers"),
]


@pytest.mark.parametrize(("truth", "outlier_share"), POINT_SETS)
def test_fit_agrees_with_opencv_findhomography_on_synthetic_points(
    truth: np.ndarray, outlier_share: float, demo_zones: list[ZoneSpec]
) -> None:
    """Reference: OpenCV ``cv2.findHomography(..., cv2.RANSAC)`` on the same matches."""
    rng = np.random.default_rng(7)
    src = rng.uniform((0, 0), (640, 480), (200, 2))
    dst = apply_matrix(truth, src) + rng.normal(0, 0.3, src.shape)
    bad = rng.random(len(src)) < outlier_share
    dst[bad] = rng.uniform((0, 0), (640, 480), (int(bad.sum()), 2))
    fitted = fit_similarity(src, dst)
    assert fitted is not None
    matrix, inliers = fitted
    homography, mask = cv2.findHomography(src, dst, cv2.RANSAC, 2.0)
    corners = np.asarray([p for zone in demo_zones for p in zone.polygon_px])
    ours = apply_matrix(matrix, corners)
    opencv = apply_matrix(np.asarray(homography), corners)
    exact = apply_matrix(truth, corners)
    assert np.max(np.linalg.norm(ours - opencv, axis=1)) < 0.3
    assert np.max(np.linalg.norm(ours - exact, axis=1)) < 0.2
    assert abs(displacement_px(matrix, corners) - displacement_px(truth, corners)) < 0.2
    assert not inliers[bad].any() and inliers[~bad].mean() > 0.95
    assert (inliers == mask.ravel().astype(bool)).mean() > 0.95


def test_fit_refuses_too_few_points() -> None:
    assert fit_similarity([[0, 0], [1, 1]], [[0, 0], [1, 1]]) is None
    assert fit_similarity([[0, 0], [1, 1], [2, 0]], [[0, 0], [1, 1]]) is None


def test_displacement_is_the_largest_corner_move() -> None:
    turn = similarity(0, 0, 90.0, centre=(0.0, 0.0))
    assert displacement_px(turn, [(10, 0), (0, 3)]) == pytest.approx(10 * math.sqrt(2))
    assert displacement_px(similarity(3, 4, 0), [(5, 5)]) == pytest.approx(5.0)
    assert displacement_px(similarity(3, 4, 0), []) == 0.0


def test_remapped_zones_carry_each_corner_through_the_transform(
    demo_zones: list[ZoneSpec]
) -> None:
    matrix = similarity(10.0, -7.0, 1.1)
    moved = remap_zones(demo_zones, matrix)
    assert [z.id for z in moved] == [z.id for z in demo_zones]
    for before, after in zip(demo_zones, moved, strict=True):
        assert (after.kind, after.label) == (before.kind, before.label)
        expected = apply_matrix(matrix, before.polygon_px)
        assert np.allclose(np.asarray(after.polygon_px), expected, atol=0.051)


RENDERED_MOVES = [
    pytest.param(CameraTransform(), 1.0, False, id="in place"),
    pytest.param(CameraTransform(0.3, -0.2, 0.02), 0.9, False, id="jitter, darker"),
    pytest.param(CameraTransform(10.0, -7.0, 1.1), 1.0, False, id="the demo nudge"),
    pytest.param(CameraTransform(10.0, -7.0, 1.1), 1.15, True, id="nudge, brighter, arm in view"),
    pytest.param(CameraTransform(-15.0, 4.0, -2.0), 1.0, True, id="big move, arm in view"),
    pytest.param(CameraTransform(3.0, 0.0, 0.0), 1.0, False, id="3 px shift"),
]


@pytest.fixture(scope="module")
def reference_views(render: Render, demo_zones: list[ZoneSpec]) -> dict[float, ReferenceView]:
    reference = render(seed=1)
    return {scale: ReferenceView(reference, demo_zones, scale) for scale in (SCALE, FULL_SCALE)}


# (scale, largest error at a zone corner in px): the live check's half resolution, and the
# full resolution used for re-mapping zones
ACCURACY = [pytest.param(SCALE, 1.5, id="live check"), pytest.param(FULL_SCALE, 0.4, id="re-map")]


@pytest.mark.parametrize(("scale", "error_px"), ACCURACY)
@pytest.mark.parametrize(("transform", "gain", "arm"), RENDERED_MOVES)
def test_estimate_matches_the_renderers_camera_transform(
    render: Render, demo_zones: list[ZoneSpec], reference_views: dict[float, ReferenceView],
    transform: CameraTransform, gain: float, arm: bool, scale: float, error_px: float,
) -> None:
    """Reference: the renderer's own camera transform (the frame is drawn with it)."""
    image = render(transform=transform, gain=gain, seed=11, stage="empty")
    if arm:
        image = reach_into(image, (330.0, 220.0), (470.0, 600.0), width_px=70.0)
    estimate = reference_views[scale].estimate(image)
    assert estimate is not None
    corners = [p for zone in demo_zones for p in zone.polygon_px]
    mapped = apply_matrix(estimate.matrix, corners)
    for corner, found in zip(corners, mapped, strict=True):
        expected = transform.apply(corner, 640, 480)
        assert math.dist(found, expected) < error_px, (corner, found, expected)
    truth = max(true_shift_px(corner, transform) for corner in corners)
    assert estimate.shift_px == pytest.approx(truth, abs=error_px)
    assert estimate.rotation_deg == pytest.approx(transform.rot_deg, abs=0.15)


def test_estimate_gives_up_on_a_frame_of_something_else(
    reference_views: dict[float, ReferenceView]
) -> None:
    reference_view = reference_views[SCALE]
    noise = np.random.default_rng(0).integers(0, 256, (480, 640, 3), dtype=np.uint8)
    blank = np.full((480, 640, 3), 90, np.uint8)
    assert reference_view.estimate(blank) is None
    assert reference_view.estimate(noise) is None
    assert reference_view.estimate(np.zeros((240, 320, 3), np.uint8)) is None


@dataclass
class ScriptedView:
    """Stands in for ReferenceView: hands out shifts from a list (None = no estimate)."""

    shifts: list[float | None]
    calls: int = 0
    too_few_features: bool = False

    def estimate(self, image: U8Array,
                 ignore: Sequence[tuple[float, float, float]] = ()) -> ShiftEstimate | None:
        shift = self.shifts[min(self.calls, len(self.shifts) - 1)]
        self.calls += 1
        if shift is None:
            return None
        return ShiftEstimate(similarity(shift, 0.0, 0.0), shift, 50, 60)


def drive(shifts: list[float | None], frames: int, settings: CameraShiftSettings,
          fps: float = 30.0, *, few_features: bool = False, picture_poor: bool = False,
          ) -> tuple[list[tuple[int, bool, float]], int]:
    view = ScriptedView(shifts, too_few_features=few_features)
    judge = CameraShiftJudge(view, settings)  # type: ignore[arg-type]
    said = []
    image = np.zeros((480, 640, 3), np.uint8)
    for k in range(frames):
        if judge.due(k / fps):
            obs = judge.check(k / fps, image, picture_poor=picture_poor)
            if obs is not None:
                said.append((k, obs.moved, obs.shift_px))
    return said, view.calls


def test_checks_run_every_interval_not_every_frame() -> None:
    said, calls = drive([0.5], 90, CameraShiftSettings(interval_ms=200.0))
    assert said == [] and calls == 15  # 3 s at 5 checks per second


def test_a_move_is_confirmed_by_consecutive_checks_on_consecutive_frames() -> None:
    shifts: list[float | None] = [0.4] * 5 + [9.0] * 20
    said, _ = drive(shifts, 60, CameraShiftSettings(tolerance_px=4.0, interval_ms=200.0,
                                                    confirm_checks=2))
    # checks at frames 0, 6, ..., 24; the 6th check (frame 30) is over; confirmed at frame 31
    assert said == [(31, True, 9.0)]


@pytest.mark.parametrize(("shifts", "expected_moves"), [
    pytest.param([0.5, 4.5] * 6 + [0.5], [], id="single spikes do not flap"),
    pytest.param([5.0, 5.0, 3.0, 3.0, 3.0, 1.5, 1.5], [True, False],
                 id="clears only below half the tolerance"),
    pytest.param([5.0, 5.0, 1.0, 5.0, 1.0, 5.0], [True], id="no flapping while moved"),
])
def test_hysteresis_keeps_the_state_from_flapping(
    shifts: list[float | None], expected_moves: list[bool]
) -> None:
    said, _ = drive(shifts, 120, CameraShiftSettings(tolerance_px=4.0, interval_ms=200.0,
                                                     confirm_checks=2))
    assert [moved for _, moved, _ in said] == expected_moves


def test_no_usable_estimate_for_long_counts_as_moved() -> None:
    fps = 30.0
    said, _ = drive([0.5, None], int((BLIND_S + 1.0) * fps), CameraShiftSettings(), fps)
    assert len(said) == 1 and said[0][1] is True
    blind_from = 6  # the second check (frame 6) is the first without an estimate
    assert said[0][0] == blind_from + round(BLIND_S * fps)


@pytest.mark.parametrize(("few_features", "picture_poor"), [(True, False), (False, True)],
                         ids=["few features in the frame", "picture too dark or noisy"])
def test_no_estimate_from_a_poor_picture_is_not_a_move(few_features: bool,
                                                       picture_poor: bool) -> None:
    fps = 30.0
    view = ScriptedView([0.5, None], too_few_features=few_features)
    judge = CameraShiftJudge(view, CameraShiftSettings())  # type: ignore[arg-type]
    said = [judge.check(k / fps, np.zeros((4, 4, 3), np.uint8), picture_poor=picture_poor)
            for k in range(int((BLIND_S + 2.0) * fps)) if judge.due(k / fps)]
    assert [obs for obs in said if obs is not None] == [] and not judge.moved
    assert judge.unchecked
    view.shifts = [0.5]
    judge.check(10.0, np.zeros((4, 4, 3), np.uint8))
    assert not judge.unchecked and not judge.moved


def test_areas_to_ignore_are_left_out_of_the_estimate(
    render: Render, reference_views: dict[float, ReferenceView]
) -> None:
    view = reference_views[SCALE]
    move = CameraTransform(6.0, 2.0, 0.5)
    image = reach_into(render(transform=move, seed=12), (330.0, 220.0), (470.0, 600.0), 70.0)
    around_arm = [(400.0, 410.0, 130.0), (330.0, 220.0, 60.0)]
    estimate = view.estimate(image, around_arm)
    assert estimate is not None
    assert estimate.shift_at((319.5, 239.5)) == (pytest.approx(6.0, abs=1.5),
                                                  pytest.approx(2.0, abs=1.5))
    assert view.estimate(image, [(320.0, 240.0, 1000.0)]) is None  # nothing left to match
