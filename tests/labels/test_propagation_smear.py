"""The smear lag: flow follows the middle of a moving tool's smear, a click its leading end.

Checked on two references:
- frames exposed as a camera does (the mean of the scene over the exposure, a box filter in
  time), where the middle of the smear of a steady move trails the end of the exposure by half
  the exposure, i.e. ``exposure / 2`` of the frame's move (the centroid of a uniform exposure;
  textbook motion-blur model, e.g. Gonzalez & Woods, *Digital Image Processing*, section on
  uniform linear motion blur, from memory);
- the demo renderer's sample video with its per-frame truth.
"""

from __future__ import annotations

import functools
from collections.abc import Iterator

import cv2
import numpy as np
import numpy.typing as npt
import pytest

from stationcheck.labels.propagation import (
    FlowSettings,
    SmearLag,
    propagate,
    smear_lag,
)
from stationcheck.labels.records import FrameLabel
from stationcheck.labels.video_frames import VideoFrames
from tests.labels.conftest import VIDEO, Truth

Grey = npt.NDArray[np.uint8]
SIZE = (260, 160)  # width, height
BAR = (70, 18)  # the "tool": a textured bar, tip at its right end, rear at its left end
SUBFRAMES = 16
FRAMES = 120


def _path(t: float) -> tuple[float, float]:
    """The bar's left end at time t (frames): a to-and-fro move of up to about 8 px a frame."""
    return 95.0 + 55.0 * np.sin(2 * np.pi * t / 44.0), 70.0 + 14.0 * np.sin(2 * np.pi * t / 61.0)


@functools.cache
def exposed(exposure: float) -> list[Grey]:
    """The frames of a camera whose exposure lasts ``exposure`` of the frame interval."""
    rng = np.random.default_rng(11)
    texture = cv2.GaussianBlur(
        rng.uniform(0, 255, (BAR[1], BAR[0])).astype(np.float32), (0, 0), 1.2
    )
    texture = cv2.normalize(texture, None, 40, 230, cv2.NORM_MINMAX)
    background = np.full((SIZE[1], SIZE[0]), 128.0, np.float32)
    background += cv2.GaussianBlur(
        rng.normal(0, 6, (SIZE[1], SIZE[0])).astype(np.float32), (0, 0), 3
    )
    frames = []
    for index in range(FRAMES):
        acc = np.zeros_like(background)
        for k in range(SUBFRAMES):
            t = index - exposure + exposure * (k + 0.5) / SUBFRAMES  # exposure ends at `index`
            x, y = _path(t)
            shift = np.float32([[1, 0, x], [0, 1, y]])
            mask = cv2.warpAffine(np.ones_like(texture), shift, SIZE)
            moved = cv2.warpAffine(texture, shift, SIZE)
            acc += background * (1 - mask) + moved * mask
        frames.append(np.clip(acc / SUBFRAMES + 0.5, 0, 255).astype(np.uint8))
    return frames


def _reader(frames: list[Grey] | dict[int, Grey]):  # type: ignore[no-untyped-def]
    def read_span(first: int, last: int) -> Iterator[tuple[int, Grey]]:
        for index in range(first, last + 1):
            yield index, frames[index]

    return read_span


def _pose(index: int) -> tuple[tuple[float, float], tuple[float, float]]:
    x, y = _path(float(index))
    middle = y + (BAR[1] - 1) / 2.0
    return (x + BAR[0] - 1.0, middle), (x, middle)


def _click(index: int, rng: np.random.Generator) -> FrameLabel:
    tip, rear = _pose(index)
    noise = rng.normal(0.0, 0.5, 4)
    return FrameLabel(
        index,
        (tip[0] + noise[0], tip[1] + noise[1]),
        (rear[0] + noise[2], rear[1] + noise[3]),
        "clicked",
    )


def _tip_errors(labels: tuple[FrameLabel, ...]) -> npt.NDArray[np.float64]:
    return np.array(
        [
            np.hypot(
                label.tip[0] - _pose(label.frame_index)[0][0],
                label.tip[1] - _pose(label.frame_index)[0][1],
            )
            for label in labels
            if label.tip is not None
        ]
    )


@pytest.mark.parametrize("exposure", [0.2, 0.6])
def test_the_lag_measured_on_the_clicks_is_half_the_exposure(exposure: float) -> None:
    rng = np.random.default_rng(3)
    clicks = [_click(index, rng) for index in range(0, FRAMES, 11)]  # at rest, at full speed
    corrected = propagate(_reader(exposed(exposure)), clicks)
    plain = propagate(_reader(exposed(exposure)), clicks, FlowSettings(correct_smear=False))
    assert corrected.smear.observations >= 6
    assert corrected.smear.share == pytest.approx(exposure / 2.0, abs=0.07)
    assert plain.smear == SmearLag(0.0, 0)
    fixed, raw = _tip_errors(corrected.labels), _tip_errors(plain.labels)
    print(
        f"exposure {exposure}: lag {corrected.smear.share:.3f} from "
        f"{corrected.smear.observations} clicks; {len(raw)} -> {len(fixed)} labels, tip error "
        f"p95 {np.percentile(raw, 95):.2f} px -> {np.percentile(fixed, 95):.2f} px"
    )
    # The two directions trail differently (each by the move since its own click): corrected,
    # they agree where they did not, so fast frames get labels, no less exact.
    assert len(fixed) >= len(raw)
    if exposure >= 0.5:
        assert len(fixed) >= 1.3 * len(raw)
    assert np.percentile(fixed, 95) <= 1.5


def test_a_still_tool_is_not_moved() -> None:
    """Clicks on a bar that does not move: nothing to measure, no correction."""
    rng = np.random.default_rng(4)
    still = [exposed(0.6)[0]] * 40
    tip, rear = _pose(0)
    clicks = [
        FrameLabel(i, (tip[0] + rng.normal(0, 0.5), tip[1]), (rear[0], rear[1]), "clicked")
        for i in range(0, 40, 6)
    ]
    result = propagate(_reader(still), clicks)
    assert result.smear == SmearLag(0.0, 0)


def test_the_lag_resists_one_misclick_and_needs_enough_moving_clicks() -> None:
    rng = np.random.default_rng(5)
    settings = FlowSettings()
    observations = []
    for _ in range(12):
        move = rng.uniform(-15, 15, (2, 2)).astype(np.float32)
        offset = (0.3 * move + rng.normal(0, 0.7, (2, 2))).astype(np.float32)
        observations.append((offset, move))
    move = np.float32([[12.0, 0.0], [12.0, 0.0]])
    observations.append((np.float32([[-30.0, 0.0], [-30.0, 0.0]]), move))  # a misclick
    measured = smear_lag(observations, settings)
    assert measured.share == pytest.approx(0.3, abs=0.05)
    assert smear_lag(observations[:5], settings) == SmearLag(0.0, 0)
    too_far = [(offset * 4, m) for offset, m in observations[:12]]  # 1.2: clipped
    assert smear_lag(too_far, settings).share == settings.max_smear_lag


FIRST, LAST = 600, 1049


def test_on_the_sample_video_the_correction_brings_labels_closer_to_the_truth(truth: Truth) -> None:
    video = VideoFrames(VIDEO)
    try:
        grey = {i: cv2.cvtColor(image, cv2.COLOR_BGR2GRAY) for i, image in video.span(FIRST, LAST)}
    finally:
        video.close()
    rng = np.random.default_rng(7)
    clicks = [truth.click(i, rng) for i in range(FIRST, LAST + 1, 15)]
    corrected = propagate(_reader(grey), clicks)
    plain = propagate(_reader(grey), clicks, FlowSettings(correct_smear=False))

    def moving_errors(labels: tuple[FrameLabel, ...]) -> npt.NDArray[np.float64]:
        out = []
        for label in labels:
            i = label.frame_index
            step = np.hypot(
                truth.tip[i][0] - truth.tip[i - 1][0], truth.tip[i][1] - truth.tip[i - 1][1]
            )
            if label.tip is not None and step >= 8.0:
                out.append(np.hypot(label.tip[0] - truth.tip[i][0], label.tip[1] - truth.tip[i][1]))
        return np.array(out)

    fixed, raw = moving_errors(corrected.labels), moving_errors(plain.labels)
    print(
        f"lag {corrected.smear.share:.3f} from {corrected.smear.observations} clicks; moving "
        f"frames {len(raw)} -> {len(fixed)}, tip error median {np.median(raw):.2f} -> "
        f"{np.median(fixed):.2f} px"
    )
    # The renderer exposes over the second half of the frame interval: a quarter of the move.
    assert 0.12 <= corrected.smear.share <= 0.35
    assert len(fixed) >= 20 and np.median(fixed) < np.median(raw)
