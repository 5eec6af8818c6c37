"""The fitness report: the smallest fastener zone's inner radius, the verdict's rules, and the
figures on held-out frames."""

from __future__ import annotations

import math
from pathlib import Path

import cv2
import numpy as np
import pytest

from stationcheck.config import load_config
from stationcheck.core.records import Frame, Keypoint, Keypoints
from stationcheck.demo_station.files import DEMO_CONFIG
from stationcheck.evaluation.fitness import (
    measure_fitness,
    smallest_fastener_zone,
    verdict_reasons,
)
from stationcheck.labels.station_labels import read_station_labels, split_by_time
from stationcheck.vision.detector import bundled_model_path
from tests.evaluation.station_label_fixture import FixtureFrame, write_labels


def _distance_transform_radius(polygon: tuple[tuple[float, float], ...]) -> float:
    """Reference: OpenCV's exact Euclidean distance transform of the polygon drawn at 8x,
    whose maximum is the largest inscribed circle's radius."""
    scale = 8
    pts = np.asarray(polygon) * scale
    x0, y0 = pts.min(axis=0) - 4 * scale
    mask = np.zeros((int(pts[:, 1].max() - y0) + 4 * scale, int(pts[:, 0].max() - x0) + 4 * scale), np.uint8)
    cv2.fillPoly(mask, [np.round(pts - (x0, y0)).astype(np.int32)], 255)
    distance = cv2.distanceTransform(mask, cv2.DIST_L2, cv2.DIST_MASK_PRECISE)
    return float(distance.max()) / scale


def test_inner_radius_matches_opencv_distance_transform() -> None:
    config = load_config(DEMO_CONFIG)
    zone = smallest_fastener_zone(config)
    polygon = next(z.polygon_px for z in config.zone_specs() if z.id == zone.zone_id)
    assert zone.inner_radius_px == pytest.approx(_distance_transform_radius(polygon), abs=0.2)
    # the demo's octagons of size 34 px: inscribed radius 17 px (half the width across flats)
    assert zone.inner_radius_px == pytest.approx(17.0, abs=0.05)


@pytest.mark.parametrize(
    ("p95", "miss", "false", "reasons"),
    [
        (4.0, 0.0, 0.0, []),
        (16.9, 0.02, 0.01, []),  # limits are inclusive for the rates, strict for p95
        (17.0, 0.0, 0.0, ["tip p95 17.00 px is not below"]),
        (3.0, 0.021, 0.0, ["misses 2.1% > 2%"]),
        (3.0, 0.0, 0.011, ["false detections 1.1% > 1%"]),
        (None, None, 0.0, ["tip error not measured"]),
        (3.0, 0.0, None, ["false detections not measured"]),
        (20.0, 0.5, 0.5, ["tip p95", "misses", "false detections"]),
    ],
)
def test_verdict_rules(
    p95: float | None, miss: float | None, false: float | None, reasons: list[str]
) -> None:
    got = verdict_reasons(p95, miss, false, 17.0)
    assert len(got) == len(reasons)
    for text, expected in zip(got, reasons, strict=True):
        assert expected in text


@pytest.mark.parametrize(
    ("visible", "absent", "reasons"),
    [
        (50, 100, []),  # one frame is exactly the limit of each rate
        (49, 100, ["only 49 held-out frames with the tool in view"]),
        (500, 4, ["only 4 held-out frames marked 'tool not visible'"]),
        (10, 10, ["only 10 held-out frames with", "only 10 held-out frames marked"]),
    ],
)
def test_too_few_held_out_frames_cannot_show_the_rates(
    visible: int, absent: int, reasons: list[str]
) -> None:
    got = verdict_reasons(3.0, 0.0, 0.0, 17.0, visible, absent)
    assert len(got) == len(reasons)
    for text, expected in zip(got, reasons, strict=True):
        assert expected in text


class _ReplayDetector:
    """Answers each frame with given points (a stand-in for a model, keyed by frame index)."""

    keypoint_names = ("tip", "rear")

    def __init__(self, answers: dict[int, tuple[float, float, float]]) -> None:
        self.answers = answers

    def detect(self, frame: Frame, tip_hint_px: tuple[float, float] | None = None) -> Keypoints:
        x, y, score = self.answers[frame.index]
        return Keypoints(
            frame.index,
            frame.t_s,
            (Keypoint("tip", x, y, score), Keypoint("rear", x + 30, y, score)),
        )


def test_figures_and_verdict_on_held_out_frames(tmp_path: Path) -> None:
    blank = np.full((48, 64, 3), 100, np.uint8)
    frames = []
    for i in range(100):
        absent = i % 10 == 9
        kps = None if absent else np.array([[20.0, 20.0, 2], [50.0, 20.0, 2]])
        frames.append(FixtureFrame("rec.mp4", i, i / 10, blank, kps))
    write_labels(tmp_path, frames)
    split = split_by_time(read_station_labels(tmp_path))
    assert [i.frame_index for i in split.held_out] == list(range(80, 100))
    # held out: 18 with the tool (errors 0..3.4 px; one miss), 2 without (one false detection)
    answers = {i: (20.0 + 0.2 * (i - 80), 20.0, 0.9) for i in range(100)}
    answers[85] = (20.0, 20.0, 0.1)
    answers[99] = (5.0, 5.0, 0.1)
    answers[89] = (5.0, 5.0, 0.8)
    config = load_config(DEMO_CONFIG)
    fitness = measure_fitness(
        config,
        bundled_model_path(),
        _ReplayDetector(answers),  # type: ignore[arg-type]
        split.held_out,
        split.held_out_spans(),
        0.5,
    )
    errors = [0.2 * (i - 80) for i in range(80, 99) if i not in (85, 89)]
    assert fitness.held_out_frames == 20 and fitness.tool_absent_frames == 2
    assert fitness.tip_median_px == pytest.approx(float(np.median(errors)))
    assert fitness.tip_p95_px == pytest.approx(float(np.percentile(errors, 95)))
    assert fitness.tip_p95_share == pytest.approx(fitness.tip_p95_px / fitness.inner_radius_px)
    assert fitness.miss_rate == pytest.approx(1 / 18)
    assert fitness.false_detection_rate == pytest.approx(1 / 2)
    assert not fitness.fit and len(fitness.reasons) == 4
    assert [r.split()[0:3] for r in fitness.reasons[:2]] == [["only", "18", "held-out"]] + [
        ["only", "2", "held-out"]
    ]
    assert fitness.as_dict()["verdict"] == "NOT fit for this station"
    assert len(fitness.model_sha256) == 64 and fitness.refine_model == "tool_tip.refine.onnx"
    assert math.isclose(fitness.inner_radius_px, 17.0, abs_tol=0.05)
