"""The two-stage detector on blob models whose right answer is known without training."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from stationcheck.core.records import Frame, Keypoints
from stationcheck.vision.detector import KeypointDetector, OnnxKeypointDetector, load_detector
from stationcheck.vision.fake_detector import ReplayKeypointDetector
from tests.vision.conftest import ModelFactory, blob_frame, coarse_info


@pytest.mark.parametrize(
    ("tip", "rear"),
    [
        ((300.3, 200.7), (380.0, 262.0)),
        ((41.6, 430.2), (120.0, 400.0)),
        ((600.0, 30.5), (540.5, 90.0)),
    ],
)
def test_refined_tip_lands_on_the_blob(blob_bundle: Path, tip: tuple, rear: tuple) -> None:
    detector = load_detector(blob_bundle)
    result = detector.detect(Frame(3, 0.1, blob_frame({"tip": tip, "rear": rear})))
    assert isinstance(result, Keypoints) and result.frame_index == 3
    assert [p.name for p in result.points] == ["tip", "rear"]
    got_tip, got_rear = result.get("tip"), result.get("rear")
    assert got_tip is not None and got_rear is not None
    # Refine stage: 1 frame px per input px, so sub-pixel; the blob model's log(avg-pool)
    # heatmap is only near-Gaussian, hence 0.5 px rather than the decoder's 0.1 cell.
    assert np.hypot(got_tip.x_px - tip[0], got_tip.y_px - tip[1]) < 0.5
    # Coarse only: 20 frame px per heatmap cell and a blob smaller than a cell.
    assert np.hypot(got_rear.x_px - rear[0], got_rear.y_px - rear[1]) < 6.0
    assert detector.last_timings.refined
    assert detector.last_timings.total_ms > 0


def test_coarse_model_alone_is_a_working_detector(write_model: ModelFactory) -> None:
    detector = load_detector(write_model(coarse_info()))
    assert detector.refine is None
    result = detector.detect(Frame(0, 0.0, blob_frame({"tip": (250.0, 150.0)}, sigma_px=14)))
    tip = result.get("tip")
    assert tip is not None and np.hypot(tip.x_px - 250.0, tip.y_px - 150.0) < 4.0
    assert not detector.last_timings.refined


def test_hint_places_the_crop_when_the_coarse_pass_is_unsure(blob_bundle: Path) -> None:
    detector = load_detector(blob_bundle)
    dark = np.zeros((480, 640, 3), np.uint8)
    detector.detect(Frame(0, 0.0, dark))
    assert not detector.last_timings.refined  # nothing seen, no hint: no crop
    detector.detect(Frame(1, 0.0, dark), tip_hint_px=(200.0, 100.0))
    assert detector.last_timings.refined


def test_scores_rise_with_evidence(blob_bundle: Path) -> None:
    detector = load_detector(blob_bundle)
    bright = detector.detect(Frame(0, 0.0, blob_frame({"tip": (320.0, 240.0)})))
    dark = detector.detect(Frame(0, 0.0, np.zeros((480, 640, 3), np.uint8)))
    assert bright.points[0].score > dark.points[0].score
    assert all(0.0 <= p.score <= 1.0 for p in bright.points + dark.points)


def test_protocol_is_met_by_real_and_fake(blob_bundle: Path) -> None:
    assert isinstance(load_detector(blob_bundle), KeypointDetector)
    assert isinstance(ReplayKeypointDetector({}), KeypointDetector)


def test_fake_detector_replays_its_table_and_records_hints() -> None:
    fake = ReplayKeypointDetector({5: {"tip": (10.0, 20.0, 0.9)}})
    image = np.zeros((4, 4, 3), np.uint8)
    hit = fake.detect(Frame(5, 0.2, image), tip_hint_px=(9.0, 19.0))
    miss = fake.detect(Frame(6, 0.23, image))
    tip = hit.get("tip")
    assert tip is not None and (tip.x_px, tip.y_px, tip.score) == (10.0, 20.0, 0.9)
    assert [p.score for p in miss.points] == [0.0, 0.0]
    assert fake.hints == [(9.0, 19.0), None]


def test_detector_works_at_other_frame_sizes(blob_bundle: Path) -> None:
    detector: OnnxKeypointDetector = load_detector(blob_bundle)
    frame = blob_frame({"tip": (320.0, 240.0)})
    import cv2

    small = cv2.resize(frame, (320, 240), interpolation=cv2.INTER_AREA)
    tip = detector.detect(Frame(0, 0.0, small)).get("tip")
    assert tip is not None and np.hypot(tip.x_px - 159.75, tip.y_px - 119.75) < 1.0
