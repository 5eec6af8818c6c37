"""Our OKS against pycocotools' COCOeval.computeOks, the reference COCO keypoint evaluation
(cocodataset/cocoapi, PythonAPI/pycocotools/cocoeval.py), on hand-made cases."""

from __future__ import annotations

import math

import numpy as np
import pytest

from stationcheck.evaluation.coco_ap import oks_ap, reference_oks
from stationcheck.evaluation.oks import OKS_AREA_PX2, object_keypoint_similarity, sigmas_for
from tests.evaluation.conftest import rows

NAMES = ("tip", "rear")


@pytest.mark.parametrize(
    ("truth", "predicted"),
    [
        (rows((100, 100, 2), (150, 130, 2)), [[100, 100], [150, 130]]),  # exact
        (rows((100, 100, 2), (150, 130, 2)), [[103, 104], [150, 130]]),  # tip 5 px off
        (rows((100, 100, 2), (150, 130, 2)), [[101, 100], [160, 130]]),
        (rows((100, 100, 1), (150, 130, 2)), [[90, 95], [148, 133]]),  # hidden tip counts
        (rows((100, 100, 2), (0, 0, 0)), [[102, 99], [400, 300]]),  # rear not labelled
        (rows((320.5, 240.25, 2), (300, 200, 2)), [[340, 260], [250, 180]]),  # far off
    ],
)
def test_our_oks_matches_pycocotools(truth: np.ndarray, predicted: list) -> None:
    xy = np.array(predicted, dtype=np.float64)
    ours = object_keypoint_similarity(truth, xy, sigmas_for(NAMES))
    assert ours is not None
    assert ours == pytest.approx(reference_oks(truth, xy, NAMES), abs=1e-9)


def test_tip_oks_is_one_half_at_five_pixels() -> None:
    # Design choice documented in stationcheck.evaluation.oks: sigma_tip puts OKS 0.5 at 5 px.
    oks = object_keypoint_similarity([[0, 0, 2]], [[5.0, 0.0]], [0.0625], OKS_AREA_PX2)
    assert oks == pytest.approx(0.5, abs=0.01)


def test_no_labelled_keypoint_means_no_oks() -> None:
    assert object_keypoint_similarity(rows((0, 0, 0)), np.zeros((2, 2)), sigmas_for(NAMES)) is None


def test_ap_is_one_for_perfect_predictions_and_drops_for_bad_ones() -> None:
    rng = np.random.default_rng(3)
    truth = [rows((x, y, 2), (x + 40, y + 30, 2)) for x, y in rng.uniform(50, 400, (20, 2))]
    truth += [rows((0, 0, 0)) for _ in range(5)]  # tool absent
    perfect = [t[:, :2].copy() for t in truth]
    scores = [0.9] * 20 + [0.1] * 5  # the absent frames rank last
    assert oks_ap(truth, perfect, scores).ap == pytest.approx(1.0)
    far = [t[:, :2] + 25.0 for t in truth]
    assert oks_ap(truth, far, scores).ap == pytest.approx(0.0)
    # Confident detections on empty frames rank above true ones and cost precision.
    confident_false = [0.5] * 20 + [0.99] * 5
    assert oks_ap(truth, perfect, confident_false).ap < 0.95


def test_ap_is_nan_without_any_labelled_frame() -> None:
    assert math.isnan(oks_ap([rows((0, 0, 0))], [np.zeros((2, 2))], [0.5]).ap)
