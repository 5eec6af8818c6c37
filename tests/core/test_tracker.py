"""Tracker: score threshold, smoothing on frame timestamps, lost-track grace, reset, jump gate."""

from __future__ import annotations

import pytest

from stationcheck.core.filters import OneEuroSettings, filter_point
from stationcheck.core.plan import Thresholds
from stationcheck.core.records import Keypoint, Keypoints, ToolPose
from stationcheck.core.tracker import Tracker, TrackerSettings, TrackerState


def frame(
    i: int, tip: tuple[float, float, float] | None, rear: tuple[float, float, float] | None = None
) -> Keypoints:
    points = []
    if tip is not None:
        points.append(Keypoint("tip", *tip))
    if rear is not None:
        points.append(Keypoint("rear", *rear))
    return Keypoints(frame_index=i, t_s=i / 30.0, points=tuple(points))


def follow(tracker: Tracker, frames: list[Keypoints]) -> list[ToolPose]:
    state, poses = tracker.initial_state(), []
    for keypoints in frames:
        state, pose = tracker.update(state, keypoints)
        poses.append(pose)
    return poses


@pytest.mark.parametrize(
    ("score", "seen"),
    [(0.49, False), (0.5, True), (0.9, True), (0.0, False)],
)
def test_keypoints_below_min_score_are_not_seen(score: float, seen: bool) -> None:
    (pose,) = follow(Tracker(TrackerSettings(min_score=0.5)), [frame(0, (10.0, 20.0, score))])
    assert (pose.seen, pose.visible) == (seen, seen)
    assert pose.tip_px == ((10.0, 20.0) if seen else None)


def test_settings_come_from_the_station_thresholds() -> None:
    settings = TrackerSettings.from_thresholds(Thresholds(min_score=0.7, lost_track_grace_ms=120.0))
    assert (settings.min_score, settings.lost_track_grace_ms) == (0.7, 120.0)


def test_smoothing_uses_the_one_euro_filter_on_frame_times() -> None:
    smoothing = OneEuroSettings(min_cutoff_hz=1.0, beta=0.01)
    poses = follow(
        Tracker(TrackerSettings(smoothing=smoothing)),
        [frame(0, (0.0, 0.0, 0.9)), frame(1, (10.0, 0.0, 0.9)), frame(2, (12.0, 4.0, 0.9))],
    )
    expected = filter_point(None, (0.0, 0.0), 0.0, smoothing)
    expected = filter_point(expected, (10.0, 0.0), 1 / 30.0, smoothing)
    expected = filter_point(expected, (12.0, 4.0), 2 / 30.0, smoothing)
    assert poses[-1].tip_px == pytest.approx(expected.point_px)
    assert poses[-1].tip_px is not None and 0.0 < poses[-1].tip_px[0] < 12.0  # smoothed, not raw
    assert poses[-1].track_age_s == pytest.approx(2 / 30.0)


@pytest.mark.parametrize(
    ("missing_frames", "visible"),
    [(1, True), (9, True), (10, False), (30, False)],  # grace 300 ms = 9 frames at 30 fps
)
def test_the_pose_is_held_through_the_grace_period_then_lost(
    missing_frames: int, visible: bool
) -> None:
    frames = [frame(i, (50.0, 60.0, 0.9)) for i in range(5)]
    frames += [frame(5 + i, None) for i in range(missing_frames)]
    poses = follow(Tracker(TrackerSettings(lost_track_grace_ms=300.0)), frames)
    last = poses[-1]
    assert (last.visible, last.seen) == (visible, False)
    assert last.tip_px == ((50.0, 60.0) if visible else None)
    if visible:
        assert last.unseen_ms == pytest.approx(missing_frames * 1000 / 30.0)


def test_after_a_loss_the_filter_starts_afresh_at_the_new_place() -> None:
    frames = [frame(i, (50.0, 60.0, 0.9)) for i in range(5)]
    frames += [frame(5 + i, None) for i in range(12)]
    frames += [frame(17, (300.0, 200.0, 0.9))]
    poses = follow(Tracker(TrackerSettings()), frames)
    assert poses[-1].tip_px == (300.0, 200.0)  # not dragged from (50, 60)
    assert poses[-1].track_age_s == 0.0


def test_low_score_frames_count_as_unseen_for_the_grace_period() -> None:
    frames = [frame(i, (50.0, 60.0, 0.9)) for i in range(3)] + [
        frame(3 + i, (50.0, 60.0, 0.2)) for i in range(12)
    ]
    poses = follow(Tracker(TrackerSettings()), frames)
    assert [p.visible for p in poses[3:]] == [True] * 9 + [False] * 3


@pytest.mark.parametrize(
    ("jump_px", "max_speed_px_s", "accepted"),
    [
        (50.0, 4000.0, True),  # 1500 px/s
        (200.0, 4000.0, False),  # 6000 px/s: a gross detector error
        (200.0, None, True),  # gate off
    ],
)
def test_implausible_jumps_are_gated(
    jump_px: float, max_speed_px_s: float | None, accepted: bool
) -> None:
    smoothing = OneEuroSettings(beta=100.0)  # nearly no lag, so the jump shows directly
    tracker = Tracker(TrackerSettings(max_speed_px_s=max_speed_px_s, smoothing=smoothing))
    poses = follow(
        tracker, [frame(0, (100.0, 100.0, 0.9)), frame(1, (100.0 + jump_px, 100.0, 0.9))]
    )
    assert poses[-1].seen is accepted
    assert poses[-1].visible
    assert (poses[-1].tip_px is not None and poses[-1].tip_px[0] > 140.0) is accepted


def test_a_tool_that_really_moved_fast_is_reacquired_after_the_grace_period() -> None:
    frames = [frame(0, (100.0, 100.0, 0.9))] + [frame(i, (400.0, 100.0, 0.9)) for i in range(1, 14)]
    poses = follow(Tracker(TrackerSettings(max_speed_px_s=1000.0)), frames)
    first_seen = next(i for i, p in enumerate(poses[1:], start=1) if p.seen)
    assert 9 <= first_seen <= 11
    assert poses[-1].tip_px == pytest.approx((400.0, 100.0), abs=1.0)


def test_rear_is_smoothed_and_held_but_does_not_make_the_tool_visible() -> None:
    poses = follow(
        Tracker(TrackerSettings()),
        [
            frame(0, (10.0, 10.0, 0.9), (40.0, 40.0, 0.9)),
            frame(1, (11.0, 10.0, 0.9)),
            frame(2, None, (40.0, 40.0, 0.9)),
        ],
    )
    assert poses[1].rear_px == (40.0, 40.0)
    assert poses[2].seen is False and poses[2].tip_px == poses[1].tip_px


def test_the_tracker_keeps_no_state_of_its_own() -> None:
    tracker = Tracker(TrackerSettings())
    state = TrackerState()
    first = tracker.update(state, frame(0, (10.0, 10.0, 0.9)))
    again = tracker.update(state, frame(0, (10.0, 10.0, 0.9)))
    assert first == again


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"min_score": 1.5}, "min_score must be <= 1, got 1.5"),
        ({"lost_track_grace_ms": -1.0}, "lost_track_grace_ms must be >= 0.0, got -1.0"),
        ({"tip_name": ""}, "tip_name must be a non-empty string"),
        ({"max_speed_px_s": 0.0}, "max_speed_px_s must be >="),
        ({"edge_band_px": -1.0}, "edge_band_px must be >= 0.0, got -1.0"),
    ],
)
def test_tracker_settings_are_validated(kwargs: dict[str, object], message: str) -> None:
    with pytest.raises(ValueError, match=message):
        TrackerSettings(**kwargs)  # type: ignore[arg-type]


@pytest.mark.parametrize(
    ("x_px", "y_px", "seen"),
    [
        (1.0, 200.0, False),
        (3.9, 200.0, False),
        (4.0, 200.0, True),
        (635.0, 240.0, True),  # 639 - 4: the last column outside the band
        (635.5, 240.0, False),
        (320.0, 475.0, True),
        (320.0, 476.5, False),
        (-2.0, 200.0, False),  # a model may answer just beyond the picture
    ],
)
def test_a_tip_on_the_pictures_edge_band_is_not_seen(x_px: float, y_px: float, seen: bool) -> None:
    tracker = Tracker(TrackerSettings())
    _, pose = tracker.update(tracker.initial_state(), frame(0, (x_px, y_px, 0.95)), (640, 480))
    assert (pose.seen, pose.visible) == (seen, seen)


def test_without_the_picture_size_the_edge_band_is_off() -> None:
    (pose,) = follow(Tracker(TrackerSettings()), [frame(0, (1.0, 200.0, 0.95))])
    assert pose.seen


def test_a_tool_leaving_nose_first_is_lost_after_the_grace_period() -> None:
    """Its nose rests on the left edge: the tip drawn there does not hold the tool."""
    tracker = Tracker(TrackerSettings(lost_track_grace_ms=300.0))
    state, poses = tracker.initial_state(), []
    for i in range(40):
        tip = (100.0, 200.0, 0.9) if i < 10 else (1.5, 201.0, 0.85)
        state, pose = tracker.update(state, frame(i, tip), (640, 480))
        poses.append(pose)
    assert all(p.seen for p in poses[:10])
    assert not any(p.seen for p in poses[10:])
    # last seen at frame 9 (0.3 s); still held at 0.3 s later, gone after
    assert poses[18].visible and not poses[19].visible
