"""Tip metrics on hand-computed cases."""

from __future__ import annotations

import math

import numpy as np
import pytest

from stationcheck.evaluation.metrics import tip_metrics
from tests.evaluation.conftest import rows


def pred(
    tip: tuple[float, float, float], rear: tuple[float, float, float] = (0, 0, 0)
) -> np.ndarray:
    return np.array([tip, rear], dtype=np.float64)


def test_hand_computed_case() -> None:
    truth = [
        rows((100, 100, 2), (130, 100, 2)),  # error 0 px
        rows((100, 100, 2)),  # error 3 px
        rows((100, 100, 2)),  # error 6 px (3-4-5 x 1.2)
        rows((100, 100, 2)),  # missed (score 0.2)
        rows((100, 100, 1)),  # hidden: counts in neither rate
        rows((0, 0, 0)),  # absent, falsely detected
        rows((0, 0, 0)),  # absent, correctly quiet
    ]
    predicted = [
        pred((100, 100, 0.9), (134, 103, 0.8)),
        pred((103, 100, 0.9)),
        pred((103.6, 104.8, 0.8)),
        pred((100, 100, 0.2)),
        pred((300, 300, 0.9)),
        pred((50, 50, 0.7)),
        pred((50, 50, 0.1)),
    ]
    m = tip_metrics(truth, predicted, min_score=0.5)
    assert (m.frames, m.visible_frames, m.hidden_frames, m.absent_frames) == (7, 4, 1, 2)
    assert m.tip_median_px == pytest.approx(3.0)
    assert m.tip_p95_px == pytest.approx(3.0 + 0.9 * 3.0)  # numpy linear percentile of 0, 3, 6
    assert m.tip_max_px == pytest.approx(6.0)
    assert (m.pck_2px, m.pck_5px, m.pck_10px) == (0.25, 0.5, 0.75)
    assert m.miss_rate == 0.25
    assert m.false_detection_rate == 0.5
    assert m.rear_median_px == pytest.approx(5.0)


@pytest.mark.parametrize(
    ("truth_v", "score", "miss", "false"),
    [(2, 0.9, 0.0, None), (2, 0.4, 1.0, None), (0, 0.9, None, 1.0), (0, 0.4, None, 0.0)],
)
def test_rates_follow_visibility_and_threshold(
    truth_v: int, score: float, miss: float | None, false: float | None
) -> None:
    m = tip_metrics([rows((10, 10, truth_v))], [pred((10, 10, score))], min_score=0.5)
    assert _same(m.miss_rate, miss) and _same(m.false_detection_rate, false)


def _same(value: float, expected: float | None) -> bool:
    """None means the rate has no frames to count over (NaN)."""
    return math.isnan(value) if expected is None else value == expected


def test_mismatched_lengths_are_refused() -> None:
    with pytest.raises(ValueError, match="1 truth rows but 0 predictions"):
        tip_metrics([rows((1, 1, 2))], [], 0.5)
