"""Model files that break the contract are refused with one clear line (ModelError)."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import onnx
import pytest

from stationcheck.core.records import Frame
from stationcheck.errors import ModelError, ModelOutputError
from stationcheck.vision.detector import OnnxKeypointDetector, load_detector
from stationcheck.vision.onnx_model import KeypointModel
from tests.vision.conftest import ModelFactory, blob_model_proto, coarse_info, refine_info


def test_a_good_model_loads_and_runs(write_model: ModelFactory) -> None:
    model = KeypointModel(write_model(coarse_info()))
    out = model.run(np.zeros((1, 3, 96, 128), np.float32))
    assert out.shape == (2, 24, 32)


def test_a_symbolic_batch_dimension_is_accepted(write_model: ModelFactory) -> None:
    model = KeypointModel(write_model(coarse_info(), input_shape=["batch", 3, 96, 128]))
    assert model.info.input_width_px == 128


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"props": {}}, "not a stationcheck keypoint model"),
        ({"input_shape": [1, 3, 100, 128]}, "input shape .* does not match the metadata"),
        ({"input_shape": [3, 96, 128]}, "input shape"),
        ({"input_shape": [1, 3, "h", "w"]}, "input shape"),
    ],
)
def test_bad_models_are_refused_on_load(
    write_model: ModelFactory, kwargs: dict[str, Any], message: str
) -> None:
    info = coarse_info()
    path = write_model(info, **kwargs)
    with pytest.raises(ModelError, match=message) as caught:
        KeypointModel(path)
    assert "\n" not in str(caught.value)


def test_output_shape_must_match_the_stride(tmp_path: Path) -> None:
    graph_info = coarse_info(output_stride=4)
    claimed = coarse_info(output_stride=8)
    proto = blob_model_proto(graph_info)
    for prop in proto.metadata_props:
        if prop.key == "output_stride":
            prop.value = str(claimed.output_stride)
    path = tmp_path / "stride.onnx"
    onnx.save(proto, str(path))
    with pytest.raises(ModelError, match="output shape .* does not match the metadata"):
        KeypointModel(path)


def test_a_file_that_is_not_onnx_is_refused(tmp_path: Path) -> None:
    path = tmp_path / "notes.onnx"
    path.write_text("this is not a model\n")
    with pytest.raises(ModelError, match="not a readable ONNX model"):
        KeypointModel(path)


def test_a_missing_file_is_refused(tmp_path: Path) -> None:
    with pytest.raises(ModelError, match="model file not found"):
        KeypointModel(tmp_path / "absent.onnx")


@pytest.mark.parametrize(("kind", "message"), [
    ({"make_nan": True}, "NaN or infinite output"),
    ({"make_zero": True}, "all-zero output"),
])
def test_unusable_output_is_a_per_frame_model_output_error(
    write_model: ModelFactory, kind: dict[str, bool], message: str,
) -> None:
    """Real onnxruntime sessions of tiny onnx-built graphs: log of a negative number gives NaN
    (IEEE 754), a constant p = 0.5 gives logits of exactly 0."""
    detector = load_detector(write_model(coarse_info(), **kind))
    frame = Frame(0, 0.0, np.full((480, 640, 3), 100, np.uint8))
    with pytest.raises(ModelOutputError, match=message):
        detector.detect(frame)


def test_threads_must_be_positive(write_model: ModelFactory) -> None:
    with pytest.raises(ModelError, match="threads must be >= 1"):
        KeypointModel(write_model(coarse_info()), threads=0)


def test_a_refine_model_cannot_run_alone(write_model: ModelFactory) -> None:
    with pytest.raises(ModelError, match="cannot run alone"):
        load_detector(write_model(refine_info()))


def test_a_missing_refine_companion_is_refused(write_model: ModelFactory) -> None:
    with pytest.raises(ModelError, match="is not next to it"):
        load_detector(write_model(coarse_info(refine_model="gone.refine.onnx")))


def test_refine_keypoints_must_exist_in_the_coarse_model(write_model: ModelFactory) -> None:
    coarse = KeypointModel(write_model(coarse_info(keypoint_names=("rear",))))
    refine = KeypointModel(write_model(refine_info()))
    with pytest.raises(ModelError, match="does not have"):
        OnnxKeypointDetector(coarse, refine)
