"""Frame-to-input mapping, checked against OpenCV's own resize and a numpy reference."""

from __future__ import annotations

import cv2
import numpy as np
import pytest

from stationcheck.vision.preprocessing import InputWindow, Preprocessor
from tests.vision.conftest import coarse_info, refine_info


def test_whole_frame_window_matches_cv2_resize_pixel_centres() -> None:
    # Reference: cv2.resize INTER_AREA at an integer factor averages s x s blocks, so output
    # pixel u is centred on input x = (u + 0.5) * s - 0.5.
    image = np.zeros((480, 640, 3), np.uint8)
    image[200:205, 300:305] = 255  # one 5x5 block = one output pixel at scale 1/5
    small = cv2.resize(image, (128, 96), interpolation=cv2.INTER_AREA)
    v, u = np.unravel_index(np.argmax(small[:, :, 0]), small.shape[:2])
    window = InputWindow.whole_frame(640, 480, 128, 96)
    assert window.to_input(302.0, 202.0) == pytest.approx((float(u), float(v)))
    assert window.to_frame(*window.to_input(123.4, 321.0)) == pytest.approx((123.4, 321.0))


def test_crop_at_scale_one_copies_frame_pixels() -> None:
    rng = np.random.default_rng(1)
    image = rng.integers(0, 256, (480, 640, 3), dtype=np.uint8)
    pre = Preprocessor(refine_info())
    blob, window = pre.crop(image, 200.4, 150.6)
    u0, v0 = window.to_input(0.0, 0.0)
    x0, y0 = round(-u0), round(-v0)
    expected = image[y0 : y0 + 96, x0 : x0 + 96, ::-1].transpose(2, 0, 1) / 255.0
    assert np.allclose(blob[0], expected, atol=1e-6)
    assert window.to_input(200.0, 151.0) == pytest.approx((48.0, 48.0))


def test_crop_outside_the_frame_replicates_the_border() -> None:
    image = np.full((480, 640, 3), 77, np.uint8)
    blob, _ = Preprocessor(refine_info()).crop(image, -30.0, 500.0)
    assert np.allclose(blob, 77 / 255.0, atol=1e-6)


@pytest.mark.parametrize(
    ("mean", "std"),
    [((0.45, 0.45, 0.45), (0.25, 0.25, 0.25)), ((0.485, 0.456, 0.406), (0.229, 0.224, 0.225))],
)
def test_blob_matches_numpy_normalisation(mean: tuple, std: tuple) -> None:
    rng = np.random.default_rng(2)
    image = rng.integers(0, 256, (96, 128, 3), dtype=np.uint8)
    blob, _ = Preprocessor(coarse_info(mean=mean, std=std)).whole_frame(image)
    rgb = image[:, :, ::-1].astype(np.float64) / 255.0
    reference = ((rgb - np.array(mean)) / np.array(std)).transpose(2, 0, 1)[None]
    assert blob.dtype == np.float32 and blob.shape == (1, 3, 96, 128)
    assert np.allclose(blob, reference, atol=1e-5)
