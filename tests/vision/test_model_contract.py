"""The model metadata contract: round trip through onnx and onnxruntime, and refusals."""

from __future__ import annotations

import json
from pathlib import Path

import onnxruntime as ort
import pytest

from stationcheck.errors import ModelError
from stationcheck.vision.model_contract import (
    ModelInfo,
    ScoreCalibration,
    metadata_props,
    parse_metadata,
)
from tests.vision.conftest import ModelFactory, coarse_info


def test_metadata_round_trips_through_onnxruntime(write_model: ModelFactory) -> None:
    info = coarse_info(
        mean=(0.485, 0.456, 0.406),
        std=(0.229, 0.224, 0.225),
        refine_model="x.refine.onnx",
        score_calibration={
            "tip": ScoreCalibration(1.7, -0.3, 0.4),
            "rear": ScoreCalibration(2.0, 1.0),
        },
        description="test model",
        motion_lead=0.2,
    )
    path = write_model(info)
    meta = ort.InferenceSession(str(path)).get_modelmeta().custom_metadata_map
    assert parse_metadata(meta) == info
    assert json.loads(meta["keypoint_names"]) == ["tip", "rear"]


def _props(**changes: str | None) -> dict[str, str]:
    props = metadata_props(coarse_info())
    for key, value in changes.items():
        key = key.replace("__", ".")
        if value is None:
            props.pop(key, None)
        else:
            props[key] = value
    return props


@pytest.mark.parametrize(
    ("changes", "message"),
    [
        ({}, None),
        ({"crop_scale": None, "score_calibration": None}, None),  # optional keys
        ({"keypoint_names": None}, "metadata lacks keypoint_names"),
        ({"stationcheck__format_version": None}, "not a stationcheck keypoint model"),
        ({"keypoint_names": "tip,rear"}, "not valid JSON"),
        ({"keypoint_names": '"tip"'}, "must be a JSON list"),
        ({"keypoint_names": "[]"}, "keypoint names must be non-empty"),
        ({"keypoint_names": '["tip", "tip"]'}, "must be unique"),
        ({"input_size": "[128]"}, r"\[width, height\] integers"),
        ({"input_size": "[130, 96]"}, "multiple of the output stride"),
        ({"output_stride": "four"}, "ill-formed model metadata"),
        ({"normalisation": '{"mean": [0, 0, 0]}'}, "normalisation"),
        ({"normalisation": '{"mean": [0, 0, 0], "std": [1, 0, 1]}'}, "std values must be > 0"),
        ({"stage": "middle"}, "stage must be one of"),
        ({"stationcheck__format_version": "2"}, "format version 2 is not supported"),
        ({"score_calibration": '{"elbow": [1, 0]}'}, "unknown keypoints"),
        ({"score_calibration": '{"tip": [-1, 0]}'}, "slope > 0"),
        ({"score_calibration": '{"tip": [1, 0, -0.5]}'}, "coarse slope >= 0"),
        ({"score_calibration": '{"tip": [1]}'}, "a score calibration is"),
        ({"motion_lead": "0.25"}, None),
        ({"motion_lead": "-0.1"}, r"motion lead must be within \[0, 1\]"),
        ({"motion_lead": "1.5"}, "motion lead must be within"),
        ({"motion_lead": "nan"}, "motion lead must be within"),
        ({"motion_lead": "fast"}, "ill-formed model metadata"),
    ],
)
def test_parse_metadata_accepts_good_and_refuses_bad(
    changes: dict[str, str | None], message: str | None
) -> None:
    props = _props(**changes)
    if message is None:
        assert isinstance(parse_metadata(props), ModelInfo)
        return
    with pytest.raises(ModelError, match=message) as caught:
        parse_metadata(props, source="m.onnx")
    assert "\n" not in str(caught.value) and str(caught.value).startswith("m.onnx: ")


def test_score_calibration_is_a_monotone_sigmoid() -> None:
    calib = ScoreCalibration(2.0, -1.0)
    assert calib.score(0.5) == pytest.approx(0.5)
    assert calib.score(-1000.0) == 0.0 and calib.score(1000.0) == 1.0
    assert calib.score(0.0) < calib.score(0.4) < calib.score(3.0)


def test_heatmap_size_follows_stride(tmp_path: Path) -> None:
    info = coarse_info(input_width_px=128, input_height_px=96, output_stride=4)
    assert (info.heatmap_width, info.heatmap_height) == (32, 24)
