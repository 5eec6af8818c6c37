"""Picture-quality figures against independent measures, and the states they lead to."""

from __future__ import annotations

import cv2
import numpy as np
import pytest

from stationcheck.config.judgement_settings import PictureQualitySettings
from stationcheck.config.schema import JudgementsSection
from stationcheck.judgements.picture_quality import INTERVAL_S, QualityMonitor, measure_quality
from tests.judgements.conftest import Render


def _smooth_scene() -> np.ndarray:
    """A smooth grey ramp with a few soft blobs: little structure for the noise mask to see."""
    ys, xs = np.mgrid[0:480, 0:640].astype(np.float32)
    scene = 70.0 + 0.12 * xs + 0.05 * ys
    scene += 40.0 * np.exp(-((xs - 200) ** 2 + (ys - 250) ** 2) / (2 * 60.0**2))
    return scene


@pytest.mark.parametrize("sigma", [2.0, 4.0, 8.0])
def test_noise_estimate_matches_the_noise_that_was_added(sigma: float) -> None:
    # reference: the sample standard deviation (numpy) of the Gaussian noise actually added
    rng = np.random.default_rng(int(sigma))
    noise = rng.normal(0.0, sigma, (480, 640)).astype(np.float32)
    grey = np.clip(_smooth_scene() + noise, 0, 255).astype(np.uint8)
    added = float(np.std(grey.astype(np.float32) - np.clip(_smooth_scene(), 0, 255)))
    assert measure_quality(grey).noise_sigma == pytest.approx(added, rel=0.12)


def test_brightness_and_contrast_are_numpys_mean_and_standard_deviation(render: Render) -> None:
    image = render(seed=3)
    grey = cv2.cvtColor(image, cv2.COLOR_BGR2GRAY).astype(np.float64)
    figures = measure_quality(image)
    assert figures.brightness == pytest.approx(float(grey.mean()), abs=1e-6)
    assert figures.contrast == pytest.approx(float(grey.std()), abs=1e-6)


def test_jpeg_blocks_raise_blockiness_and_blur_lowers_sharpness(render: Render) -> None:
    """OpenCV's own JPEG encoder makes the blocks; OpenCV's Gaussian blur the softness."""
    image = render(seed=4)
    plain = measure_quality(image)
    figures = {}
    for quality in (90, 40, 15):
        ok, data = cv2.imencode(".jpg", image, [cv2.IMWRITE_JPEG_QUALITY, quality])
        assert ok
        figures[quality] = measure_quality(cv2.imdecode(data, cv2.IMREAD_COLOR)).blockiness
    assert plain.blockiness == pytest.approx(1.0, abs=0.1)
    assert plain.blockiness < figures[90] < figures[40] < figures[15]
    assert figures[15] > 2.0
    soft = [measure_quality(cv2.GaussianBlur(image, (0, 0), s)).sharpness for s in (1.0, 2.0)]
    assert plain.sharpness > soft[0] > soft[1]


def test_a_dark_picture_cannot_check_the_camera_after_two_measurements(render: Render) -> None:
    monitor = QualityMonitor(PictureQualitySettings())
    states = [monitor.observe(0.0, render(seed=1))]
    dark = render(seed=2, gain=0.1)
    states += [monitor.observe(k * INTERVAL_S, dark) for k in (1, 2, 3)]
    first, *later = states
    assert first is not None and first.judgeable and first.camera_checkable
    assert later[0] is None  # one poor measurement changes nothing yet
    changed = later[1]
    assert changed is not None
    assert (changed.judgeable, changed.camera_checkable) == (False, False)
    assert "too dark" in changed.reason
    assert monitor.observe(3.5 * INTERVAL_S, dark) is None  # not due between measurements


def test_a_judgement_that_cannot_work_makes_the_picture_unjudgeable(render: Render) -> None:
    monitor = QualityMonitor(PictureQualitySettings())
    image = render(seed=1)
    state = monitor.observe(0.0, image, judge_reason="bin_a too noisy to judge")
    assert not monitor.judgeable and monitor.camera_checkable  # the first measurement decides
    assert state is not None and not state.judgeable and "bin_a too noisy" in state.reason


def test_thresholds_come_from_the_config() -> None:
    section = JudgementsSection.model_validate(
        {"picture_quality": {"min_brightness": 35.0, "max_blockiness": 2.5}})
    settings = section.to_settings().picture_quality
    assert (settings.min_brightness, settings.max_blockiness) == (35.0, 2.5)
    assert settings.max_noise_sigma == PictureQualitySettings().max_noise_sigma
    with pytest.raises(ValueError, match="max_blockiness"):
        JudgementsSection.model_validate({"picture_quality": {"max_blockiness": 0.5}})
