"""Propagation against the demo renderer's truth (the renderer draws every frame from a known
tool pose, so each propagated point can be compared with where the tip really is).

Clicks are simulated as the truth plus 1 px of noise, in the order the Label tab asks for them
(proposals, then the middle of the longest unlabelled run)."""

from __future__ import annotations

from collections.abc import Iterator

import cv2
import numpy as np
import numpy.typing as npt
import pytest

from stationcheck.labels.propagation import FlowSettings, HiddenRun, propagate, propagate_span
from stationcheck.labels.records import FrameLabel
from stationcheck.labels.video_frames import VideoFrames
from tests.labels.conftest import VIDEO, Truth

FIRST, LAST = 600, 1049  # 15 s of the sample video: four fastener visits with fast moves
HIDDEN_FIRST, HIDDEN_LAST = 2899, 2970  # the tool is out of view here


@pytest.fixture(scope="module")
def grey() -> dict[int, npt.NDArray[np.uint8]]:
    video = VideoFrames(VIDEO)
    try:
        return {i: cv2.cvtColor(image, cv2.COLOR_BGR2GRAY) for i, image in video.span(FIRST, LAST)}
    finally:
        video.close()


def _reader(frames: dict[int, npt.NDArray[np.uint8]]):  # type: ignore[no-untyped-def]
    def read_span(first: int, last: int) -> Iterator[tuple[int, npt.NDArray[np.uint8]]]:
        for index in range(first, last + 1):
            yield index, frames[index]

    return read_span


def test_propagated_labels_follow_the_rendered_tip(
    grey: dict[int, npt.NDArray[np.uint8]], truth: Truth
) -> None:
    rng = np.random.default_rng(7)
    clicked = {i: truth.click(i, rng) for i in range(FIRST, LAST + 1, 45)}
    clicked[LAST] = truth.click(LAST, rng)
    cache: dict = {}  # type: ignore[type-arg]
    for _ in range(4):  # the engineer clicks what the screen queues, a few rounds
        result = propagate(_reader(grey), clicked.values(), cache=cache)
        for index in result.queued()[:4]:
            clicked[index] = truth.click(index, rng)
    result = propagate(_reader(grey), clicked.values(), cache=cache)
    errors = np.array(
        [
            np.hypot(l.tip[0] - truth.tip[l.frame_index][0], l.tip[1] - truth.tip[l.frame_index][1])
            for l in result.labels
            if l.tip is not None
        ]
    )
    clicks = len(clicked)
    labelled = clicks + len(result.labels)
    print(
        f"{clicks} clicks -> {labelled} labelled frames of {LAST - FIRST + 1}; propagated tip "
        f"error median {np.median(errors):.2f} px, p95 {np.percentile(errors, 95):.2f} px"
    )
    assert labelled >= 12 * clicks  # about 60 clicks for 1,000 frames, with room to spare
    assert not {l.frame_index for l in result.labels} & set(clicked)  # clicks stay clicks
    assert np.median(errors) <= 1.5  # the renderer's truth is the reference
    assert np.percentile(errors, 95) <= 5.0
    unlabelled = {i for first, last in result.gaps for i in range(first, last + 1)}
    labelled_frames = set(clicked) | {l.frame_index for l in result.labels}
    assert unlabelled | labelled_frames == set(range(FIRST, LAST + 1))  # every frame accounted
    assert all(l.source == "propagated" for l in result.labels)


@pytest.fixture(scope="module")
def around_hidden() -> dict[int, npt.NDArray[np.uint8]]:
    """Grey frames from 40 before the tool goes out of view to 5 after it is back."""
    video = VideoFrames(VIDEO)
    try:
        return {
            i: cv2.cvtColor(image, cv2.COLOR_BGR2GRAY)
            for i, image in video.span(HIDDEN_FIRST - 40, HIDDEN_LAST + 5)
        }
    finally:
        video.close()


def _clicks_around_hidden(truth: Truth) -> tuple[FrameLabel, FrameLabel, FrameLabel]:
    """A visible click 40 frames before the tool leaves, two "not visible" clicks while it is
    out of view."""
    visible = truth.click(HIDDEN_FIRST - 40, np.random.default_rng(3))
    hidden_a = FrameLabel(HIDDEN_FIRST + 10, None, None, "clicked")
    hidden_b = FrameLabel(HIDDEN_LAST - 5, None, None, "clicked")
    return visible, hidden_a, hidden_b


def test_a_not_visible_click_stops_propagation(
    truth: Truth, around_hidden: dict[int, npt.NDArray[np.uint8]]
) -> None:
    frames = around_hidden
    visible, hidden_a, hidden_b = _clicks_around_hidden(truth)
    result = propagate(_reader(frames), [visible, hidden_a, hidden_b])
    indices = {l.frame_index for l in result.labels}
    settings = FlowSettings()
    # only one way from the visible click, and never across or between "not visible" clicks
    assert indices and max(indices) <= visible.frame_index + settings.max_one_way_frames
    assert all(truth.visible[i] for i in indices)
    assert (HIDDEN_FIRST + 11, HIDDEN_LAST - 6) not in result.gaps  # nothing to click in there
    # ... but the run between the two is the engineer's to look over, and so is the one after
    # the visible click's reach, up to the first "not visible" click
    runs = {(run.first, run.last): run for run in result.hidden_runs}
    assert runs[(HIDDEN_FIRST + 11, HIDDEN_LAST - 6)] == HiddenRun(
        HIDDEN_FIRST + 11, HIDDEN_LAST - 6, True, True
    )
    before = [run for run in result.hidden_runs if run.last == HIDDEN_FIRST + 9]
    assert len(before) == 1 and before[0].hidden_after and not before[0].hidden_before
    assert not any(l.frame_index > visible.frame_index + 15 for l in result.labels)  # no mark yet
    assert result.queued() and all(
        visible.frame_index < i < hidden_a.frame_index for i in result.queued()
    )


def test_two_directions_that_disagree_are_queued(
    grey: dict[int, npt.NDArray[np.uint8]], truth: Truth
) -> None:
    rng = np.random.default_rng(5)
    first = truth.click(FIRST, rng)
    wrong_tip = (truth.tip[FIRST + 30][0] + 25.0, truth.tip[FIRST + 30][1])
    last = FrameLabel(FIRST + 30, wrong_tip, truth.rear[FIRST + 30], "clicked")
    frames = [grey[i] for i in range(FIRST, FIRST + 31)]
    assert propagate_span(frames, first, last, FlowSettings()) == []


def test_one_direction_alone_is_trusted_only_near_its_click(
    grey: dict[int, npt.NDArray[np.uint8]], truth: Truth
) -> None:
    rng = np.random.default_rng(9)
    first, last = truth.click(FIRST, rng), truth.click(FIRST + 40, rng)
    frames = [grey[i].copy() for i in range(FIRST, FIRST + 41)]
    assert first.tip is not None and last.tip is not None and last.rear is not None
    x0, x1 = sorted((int(last.tip[0]), int(last.rear[0])))
    y0, y1 = sorted((int(last.tip[1]), int(last.rear[1])))
    frames[-1][max(0, y0 - 30) : y1 + 30, max(0, x0 - 30) : x1 + 30] = 128  # nothing to follow
    settings = FlowSettings()
    labels = propagate_span(frames, first, last, settings)
    offsets = [label.frame_index - FIRST for label in labels]
    assert offsets and max(offsets) <= settings.max_one_way_frames  # the rest is asked for
    for label in labels:  # the renderer's truth is the reference
        assert label.tip is not None
        tip = truth.tip[label.frame_index]
        assert np.hypot(label.tip[0] - tip[0], label.tip[1] - tip[1]) <= 5.0


def test_marked_runs_beside_not_visible_clicks_become_not_visible_labels(
    truth: Truth, around_hidden: dict[int, npt.NDArray[np.uint8]]
) -> None:
    frames = around_hidden
    visible, hidden_a, hidden_b = _clicks_around_hidden(truth)
    clicks = [visible, hidden_a, hidden_b]
    marks = [
        (HIDDEN_FIRST, HIDDEN_FIRST + 9),  # ends right before a "not visible" click
        (HIDDEN_FIRST + 11, HIDDEN_LAST - 6),  # between two
        (HIDDEN_FIRST - 30, HIDDEN_FIRST - 20),  # touches no "not visible" click: ignored
        (HIDDEN_LAST - 10, HIDDEN_LAST + 2),  # crosses a click: ignored
    ]
    result = propagate(_reader(frames), clicks, out_of_view=marks)
    hidden = sorted(l.frame_index for l in result.labels if l.tip is None)
    expected = [*range(HIDDEN_FIRST, HIDDEN_FIRST + 10), *range(HIDDEN_FIRST + 11, HIDDEN_LAST - 5)]
    assert hidden == expected
    assert all(not truth.visible[i] for i in hidden)  # the renderer's truth agrees
    assert all(l.source == "propagated" for l in result.labels)
    assert not any(run.first <= HIDDEN_FIRST + 11 <= run.last for run in result.hidden_runs)
    # what lies between the visible click's reach and the mark is still asked for
    assert any(first < HIDDEN_FIRST <= last + 1 for first, last in result.gaps)


@pytest.mark.parametrize(
    ("run", "strip"),
    [
        (HiddenRun(10, 14, False, True), (10, 11, 12, 13, 14)),
        # every 5th frame (100 frames over 23 steps, rounded up) counted from the click's side
        (HiddenRun(0, 99, False, True), (0, *range(4, 100, 5))),
        (HiddenRun(0, 99, True, False), (*range(0, 100, 5), 99)),
        (HiddenRun(0, 99, True, True), (*range(0, 100, 5), 99)),
    ],
)
def test_a_hidden_runs_strip_always_shows_the_frames_next_to_its_clicks(
    run: HiddenRun, strip: tuple[int, ...]
) -> None:
    assert run.strip() == strip


def test_two_clicks_a_little_apart_still_label_the_frames_between(
    grey: dict[int, npt.NDArray[np.uint8]], truth: Truth
) -> None:
    """Each click is off by 1.4 px, in opposite directions: the two tracks differ by 2.8 px all
    along (more than the 2.5 px allowed for drift), but that difference is the clicks' own, so
    the frames between are labelled, between the two clicks' errors."""
    first_i, last_i = FIRST + 60, FIRST + 90  # a stretch the flow follows from exact clicks

    def off(index: int, dx: float) -> FrameLabel:
        tip, rear = truth.tip[index], truth.rear[index]
        return FrameLabel(index, (tip[0] + dx, tip[1]), (rear[0] + dx, rear[1]), "clicked")

    frames = [grey[i] for i in range(first_i, last_i + 1)]
    labels = propagate_span(frames, off(first_i, 1.4), off(last_i, -1.4), FlowSettings())
    assert len(labels) >= 20
    errors = [
        np.hypot(l.tip[0] - truth.tip[l.frame_index][0], l.tip[1] - truth.tip[l.frame_index][1])
        for l in labels
        if l.tip is not None
    ]
    assert max(errors) <= 3.0  # the renderer's truth is the reference
    strict = FlowSettings(max_click_offset_px=0.0)  # without discounting the clicks' offset
    assert len(propagate_span(frames, off(first_i, 1.4), off(last_i, -1.4), strict)) < len(labels)
