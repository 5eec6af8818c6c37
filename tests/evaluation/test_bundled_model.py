"""Regression test of the bundled model against stored figures on the whole sample video.

The sample video was never used for training (the model trains on the renderer's random
frames). The stored figures come from ``stationcheck eval --json``; the targets are the
product's accuracy targets for the demo station.
"""

from __future__ import annotations

import contextlib
import io
import json
from pathlib import Path

import pytest

from stationcheck.cli import main
from stationcheck.vision.detector import bundled_model_path, load_detector

EXPECTED = json.loads(Path(__file__).with_name("bundled_model_expected.json").read_text())
# Allowed drift from the stored figures (onnxruntime kernels differ slightly across CPUs).
TOLERANCE = {
    "tip_median_px": 0.05,
    "tip_p95_px": 0.3,
    "pck_5px": 0.01,
    "miss_rate": 0.003,
    "false_detection_rate": 0.015,
    "oks_ap": 0.01,
}


@pytest.fixture(scope="module")
def figures() -> dict[str, float]:
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        assert main(["eval", "--json"]) == 0
    result: dict[str, float] = json.loads(out.getvalue())
    return result


@pytest.mark.slow
@pytest.mark.parametrize(
    ("key", "target"),
    [
        ("tip_median_px", 2.0),
        ("tip_p95_px", 5.0),
        ("miss_rate", 0.01),
        ("false_detection_rate", 0.01),
    ],
)
def test_bundled_model_meets_the_target(figures: dict[str, float], key: str, target: float) -> None:
    assert figures[key] <= target


@pytest.mark.slow
@pytest.mark.parametrize("key", sorted(TOLERANCE))
def test_bundled_model_matches_stored_figures(figures: dict[str, float], key: str) -> None:
    assert figures[key] == pytest.approx(EXPECTED["figures"][key], abs=TOLERANCE[key])


def test_bundled_model_is_small_and_self_describing() -> None:
    detector = load_detector()
    assert detector.refine is not None
    for path in (bundled_model_path(), detector.refine.path):
        assert path.stat().st_size < 2_000_000
    assert detector.keypoint_names == ("tip", "rear")
    assert "score =" in detector.coarse.info.description
    assert detector.refine.info.calibration("tip").coarse_slope > 0
    assert 0.0 < detector.refine.info.motion_lead <= 0.5
