"""The two-stage detector on blob models whose right answer is known without training."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from stationcheck.core.records import Frame, Keypoint, Keypoints
from stationcheck.vision.detector import (
    MAX_LEAD_STEP_PX,
    KeypointDetector,
    OnnxKeypointDetector,
    lead_point,
    load_detector,
)
from stationcheck.vision.table_detector import TableKeypointDetector
from tests.vision.conftest import ModelFactory, blob_frame, coarse_info, refine_info


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
    assert isinstance(TableKeypointDetector({}), KeypointDetector)


def test_table_detector_answers_from_its_table_and_records_hints() -> None:
    fake = TableKeypointDetector({5: {"tip": (10.0, 20.0, 0.9)}})
    image = np.zeros((4, 4, 3), np.uint8)
    hit = fake.detect(Frame(5, 0.2, image), tip_hint_px=(9.0, 19.0))
    miss = fake.detect(Frame(6, 0.23, image))
    tip = hit.get("tip")
    assert tip is not None and (tip.x_px, tip.y_px, tip.score) == (10.0, 20.0, 0.9)
    assert [p.score for p in miss.points] == [0.0, 0.0]
    assert list(fake.hints) == [(9.0, 19.0), None]


def test_table_detector_keeps_only_the_newest_hints() -> None:
    detector = TableKeypointDetector({}, hints_kept=8)
    image = np.zeros((4, 4, 3), np.uint8)
    for index in range(1000):
        detector.detect(Frame(index, index / 30, image), tip_hint_px=(float(index), 0.0))
    assert len(detector.hints) == 8
    assert list(detector.hints) == [(float(index), 0.0) for index in range(992, 1000)]
    assert len(TableKeypointDetector({}).hints) == 0
    with pytest.raises(ValueError, match="hints_kept must be >= 1"):
        TableKeypointDetector({}, hints_kept=0)


def test_detector_works_at_other_frame_sizes(blob_bundle: Path) -> None:
    detector: OnnxKeypointDetector = load_detector(blob_bundle)
    frame = blob_frame({"tip": (320.0, 240.0)})
    import cv2

    small = cv2.resize(frame, (320, 240), interpolation=cv2.INTER_AREA)
    tip = detector.detect(Frame(0, 0.0, small)).get("tip")
    assert tip is not None and np.hypot(tip.x_px - 159.75, tip.y_px - 119.75) < 1.0


@pytest.mark.parametrize(
    ("point", "hint", "lead", "expected"),
    [
        ((110.0, 50.0), (100.0, 50.0), 0.2, (112.0, 50.0)),
        ((100.0, 80.0), (100.0, 50.0), 0.5, (100.0, 95.0)),
        ((97.0, 46.0), (100.0, 50.0), 1.0, (94.0, 42.0)),
        ((110.0, 50.0), (100.0, 50.0), 0.0, (110.0, 50.0)),  # no lead
        ((100.0, 50.0), (100.0, 50.0), 0.3, (100.0, 50.0)),  # standing still
        ((100.0 + MAX_LEAD_STEP_PX + 1, 50.0), (100.0, 50.0), 0.2, None),  # too far: unchanged
    ],
)
def test_lead_moves_the_point_on_along_its_step_from_the_hint(
    point: tuple[float, float],
    hint: tuple[float, float],
    lead: float,
    expected: tuple[float, float] | None,
) -> None:
    before = Keypoint("tip", point[0], point[1], 0.8)
    after = lead_point(before, hint, lead)
    want = expected if expected is not None else point
    assert (after.x_px, after.y_px) == pytest.approx(want)
    assert (after.name, after.score) == ("tip", 0.8)


def test_refine_model_lead_applies_with_a_hint_only(write_model: ModelFactory) -> None:
    write_model(refine_info(motion_lead=0.25), name="lead.refine.onnx")
    detector = load_detector(write_model(coarse_info(refine_model="lead.refine.onnx")))
    frame = Frame(0, 0.0, blob_frame({"tip": (300.0, 200.0), "rear": (380.0, 260.0)}))
    alone = detector.detect(frame).get("tip")
    led = detector.detect(frame, tip_hint_px=(280.0, 200.0)).get("tip")
    assert alone is not None and led is not None and detector.last_timings.refined
    assert np.hypot(alone.x_px - 300.0, alone.y_px - 200.0) < 0.5
    # a quarter of the 20 px step from the hint, on top of where the blob is found
    assert led.x_px - alone.x_px == pytest.approx(0.25 * (alone.x_px - 280.0))
    assert led.y_px - alone.y_px == pytest.approx(0.25 * (alone.y_px - 200.0))
