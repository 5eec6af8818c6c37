"""Motion lead: measured from the detector's lag behind fast-moving tips, stored in the model
that places the tip, and the demo renderer's frames of fast moves it is measured on."""

from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import numpy.typing as npt
import onnx
import pytest

pytest.importorskip("torch")

from stationcheck.demo_station.training import FAST_STEP_PX, render_moving_sample
from stationcheck.training.bundle import measure_motion_lead, write_motion_lead
from stationcheck.training.samples import MovingSampleFn
from stationcheck.vision.detector import load_detector
from tests.vision.conftest import blob_frame, blob_model_proto, coarse_info, refine_info


@pytest.fixture
def blob_bundle(tmp_path: Path) -> Path:
    onnx.save(blob_model_proto(refine_info()), str(tmp_path / "b.refine.onnx"))
    path = tmp_path / "b.coarse.onnx"
    onnx.save(blob_model_proto(coarse_info(refine_model="b.refine.onnx")), str(path))
    return path


def lagging_sample(lag: float) -> MovingSampleFn:
    """Frames whose tip blob sits ``lag`` of the step behind the label (what a model does with
    a blurred tip), with a known step of 10-30 px in a random direction."""

    def sample(
        rng: np.random.Generator,
    ) -> tuple[npt.NDArray[np.uint8], npt.NDArray[np.float64], tuple[float, float]]:
        label = rng.uniform([150.0, 120.0], [490.0, 360.0])
        speed, direction = rng.uniform(10.0, 30.0), rng.uniform(-math.pi, math.pi)
        step = (speed * math.cos(direction), speed * math.sin(direction))
        seen = (label[0] - lag * step[0], label[1] - lag * step[1])
        rear = (label[0] + 60.0, label[1] + 40.0)
        kps = np.array([[label[0], label[1], 2.0], [rear[0], rear[1], 2.0]])
        return blob_frame({"tip": seen, "rear": rear}), kps, step

    return sample


@pytest.mark.parametrize(("lag", "lead"), [(0.0, 0.0), (0.2, 0.25), (1 / 3, 0.5)])
def test_lead_cancels_the_measured_lag(blob_bundle: Path, lag: float, lead: float) -> None:
    # A lag of L of the step seen from the previous led tip is cancelled by L / (1 - L).
    measured = measure_motion_lead(blob_bundle, lagging_sample(lag), seed=1, frames=12)
    assert measured == pytest.approx(lead, abs=0.02)


def test_lead_is_stored_in_the_refine_model(blob_bundle: Path) -> None:
    write_motion_lead(blob_bundle, 0.21)
    detector = load_detector(blob_bundle)
    assert detector.refine is not None
    assert detector.refine.info.motion_lead == pytest.approx(0.21)
    assert detector.coarse.info.motion_lead == 0.0


def test_moving_sample_is_reproducible_and_fast() -> None:
    first = render_moving_sample(np.random.default_rng(4))
    again = render_moving_sample(np.random.default_rng(4))
    assert np.array_equal(first[0], again[0]) and np.array_equal(first[1], again[1])
    assert first[2] == again[2]
    assert FAST_STEP_PX[0] <= math.hypot(*first[2]) <= FAST_STEP_PX[1]
