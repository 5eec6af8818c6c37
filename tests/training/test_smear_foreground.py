"""Motion blur of the tool alone, checked against a camera's exposure.

The reference is a moving textured bar in front of a still textured bench, exposed as a camera
does: the mean of the scene over the exposure (a box filter in time; the textbook model of
uniform linear motion blur, e.g. Gonzalez & Woods, *Digital Image Processing*, from memory),
rendered as the mean of 32 sub-frames. The augmentation sees only the last sub-frame's picture
(the bar where it ends) and the empty bench, as the fine-tune sees a station's labelled frame
and its empty view.
"""

from __future__ import annotations

from pathlib import Path

import cv2
import numpy as np
import numpy.typing as npt
import pytest

from stationcheck.labels.station_labels import StationLabel
from stationcheck.training.augment import (
    AugmentSettings,
    foreground_mask,
    motion_blur_tool,
    smear_foreground,
)
from stationcheck.training.station import LabelSource, background_plates

Image = npt.NDArray[np.uint8]
W, H = 200, 140
BAR = (60, 10)  # length, thickness
END = np.array([120.0, 70.0])  # the bar's left end (its "rear") at the end of the exposure
SUBFRAMES = 32


class _Draws:
    """A generator stand-in that hands out given values (length, then direction)."""

    def __init__(self, *values: float) -> None:
        self._values = list(values)

    def uniform(self, low: float, high: float | None = None) -> float:
        return self._values.pop(0)


def _bench() -> Image:
    rng = np.random.default_rng(2)
    noise = cv2.GaussianBlur(rng.uniform(0, 255, (H, W)).astype(np.float32), (0, 0), 2.0)
    grey = cv2.normalize(noise, None, 60, 200, cv2.NORM_MINMAX)
    return np.dstack([grey, grey * 0.9, grey * 0.8]).astype(np.uint8)


def _scene(bench: Image, rear: npt.NDArray[np.float64]) -> npt.NDArray[np.float32]:
    out = bench.astype(np.float32)
    stripes = (np.arange(BAR[0]) % 7 < 3).astype(np.float32)
    bar = np.repeat(np.repeat(stripes[None, :, None], BAR[1], axis=0), 3, axis=2)
    colour = np.array([40.0, 40.0, 230.0]) * bar + np.array([250.0, 250.0, 250.0]) * (1 - bar)
    shift = np.float32([[1, 0, rear[0]], [0, 1, rear[1] - BAR[1] / 2]])
    mask = cv2.warpAffine(np.ones(BAR[::-1], np.float32), shift, (W, H))[..., None]
    layer = cv2.warpAffine(colour.astype(np.float32), shift, (W, H))
    return out * (1 - mask) + layer * mask


def _exposed(bench: Image, move: npt.NDArray[np.float64]) -> Image:
    """The exposure that ends with the bar's rear at END, the bar having moved by ``move``."""
    acc = np.zeros((H, W, 3), np.float32)
    for k in range(SUBFRAMES):
        acc += _scene(bench, END - move + move * (k + 0.5) / SUBFRAMES)
    return np.clip(acc / SUBFRAMES + 0.5, 0, 255).astype(np.uint8)


def _keypoints() -> npt.NDArray[np.float64]:
    tip = END + [BAR[0] - 1, 0]
    return np.array([[tip[0], tip[1], 2.0], [END[0], END[1], 2.0]])


@pytest.mark.parametrize("angle_deg", [0.0, 90.0, 180.0, 225.0])
def test_the_smear_matches_a_cameras_exposure_and_keeps_the_bench_sharp(angle_deg: float) -> None:
    bench = _bench()
    length = 16.0
    angle = np.radians(angle_deg)
    move = length * np.array([np.cos(angle), np.sin(angle)])
    reference = _exposed(bench, move).astype(np.float32)
    still = np.clip(_scene(bench, END) + 0.5, 0, 255).astype(np.uint8)
    settings = AugmentSettings(motion_blur_px=(length, length))
    ours = smear_foreground(_Draws(length, angle), still, _keypoints(), bench, settings)
    window = motion_blur_tool(_Draws(length, angle), still, _keypoints(), settings)
    ours_error = np.abs(ours.astype(np.float32) - reference)
    window_error = np.abs(window.astype(np.float32) - reference)
    print(
        f"{angle_deg:g} deg: mean error {ours_error.mean():.2f} (window blur "
        f"{window_error.mean():.2f}), 99th percentile {np.percentile(ours_error, 99):.1f}"
    )
    assert ours_error.mean() <= 1.0
    assert np.percentile(ours_error, 99) <= 25.0  # the edges of a one-pixel-rounded kernel
    assert ours_error.mean() < 0.5 * window_error.mean()
    far = np.ones((H, W), bool)  # the bench away from the bar's path is untouched
    far[int(END[1]) - 30 : int(END[1]) + 30, :] = False
    assert np.array_equal(ours[far], still[far])


def test_the_mask_finds_the_bar_and_not_the_bench() -> None:
    bench = _bench()
    still = np.clip(_scene(bench, END) + 0.5, 0, 255).astype(np.uint8)
    mask = foreground_mask(still, _keypoints(), bench)
    x0, y0 = int(END[0]), int(END[1] - BAR[1] / 2)
    inside = mask[y0 + 2 : y0 + BAR[1] - 2, x0 + 2 : x0 + BAR[0] - 2]
    assert inside.min() > 0.9
    assert mask[: y0 - 5].max() < 0.01 and mask[y0 + BAR[1] + 5 :].max() < 0.01
    assert not foreground_mask(bench, _keypoints(), bench).any()  # nothing in front


def _write(path: Path, image: Image) -> Path:
    cv2.imwrite(str(path), image)
    return path


def test_a_videos_plate_is_the_median_of_its_empty_frames(tmp_path: Path) -> None:
    bench = _bench()
    still = np.clip(_scene(bench, END) + 0.5, 0, 255).astype(np.uint8)
    no_tool = np.zeros((2, 3))
    labels = []
    for index in range(12):
        picture = bench.copy()
        if index % 4 == 0:  # a hand passing through a few of the empty frames
            cv2.circle(picture, (30 + 10 * index, 40), 15, (90, 140, 200), -1)
        labels.append(
            StationLabel(
                _write(tmp_path / f"a{index}.png", picture),
                "a.mp4",
                index,
                index / 30.0,
                no_tool,
                "",
            )
        )
    seen = np.array([[*_keypoints()[0]], [*_keypoints()[1]]])
    labels.append(
        StationLabel(_write(tmp_path / "t.png", still), "a.mp4", 20, 0.7, seen, "clicked")
    )
    labels += [  # another video with too few empty frames for a plate
        StationLabel(_write(tmp_path / "b0.png", bench), "b.mp4", 0, 0.0, no_tool, ""),
        StationLabel(tmp_path / "t.png", "b.mp4", 5, 0.2, seen, "clicked"),
    ]
    plates = background_plates(labels)
    assert set(plates) == {"a.mp4"}
    assert np.abs(plates["a.mp4"].astype(int) - bench.astype(int)).max() <= 1  # the hand voted out
    source = LabelSource(labels)
    rng = np.random.default_rng(0)
    plated = 0
    for _ in range(60):
        image, kps, plate = source.sample_with_background(rng)
        assert image.shape == (H, W, 3) and kps.shape == (2, 3)
        if plate is not None:
            assert np.array_equal(plate, plates["a.mp4"])
            plated += 1
    assert 0 < plated < 60  # video a's frames come with its plate, video b's without
