"""Factories for tiny ONNX models built with onnx.helper (no training needed).

A *blob model* turns colour channels into heatmap logits: keypoint k's channel is picked by a
1x1 convolution and average-pooled by the stride to ``p`` (scaled so a full blob gives 0.97),
and the logit is ``log(p) - log(1 - p)``, so ``sigmoid(logit) = p`` follows a Gaussian blob
painted in that channel (a "NaN model" flips the sign so the logarithm of a negative appears;
a "zero model" has p = 0.5 everywhere, so every logit is exactly 0). Its answers are known
without any learning, which makes the whole detector path testable.
"""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import onnx
import pytest
from onnx import TensorProto, helper, numpy_helper

from stationcheck.vision.model_contract import ModelInfo, metadata_props

CHANNEL_OF = {"tip": 2, "rear": 0}  # tip painted red, rear blue (RGB input order)

ModelFactory = Callable[..., Path]


def blob_model_proto(
    info: ModelInfo,
    input_shape: list[Any] | None = None,
    make_nan: bool = False,
    props: dict[str, str] | None = None,
    make_zero: bool = False,
) -> onnx.ModelProto:
    k = len(info.keypoint_names)
    h, w, s = info.input_height_px, info.input_width_px, info.output_stride
    weights = np.zeros((k, 3, 1, 1), np.float32)
    for i, name in enumerate(info.keypoint_names):
        weights[i, 2 - CHANNEL_OF.get(name, 2), 0, 0] = 1.0  # BGR channel index -> RGB input
    sign = -1.0 if make_nan else 1.0
    shape = input_shape or [1, 3, h, w]
    first = "image"
    nodes = []
    if len(shape) == 3:  # a rank-3 input made valid by an Unsqueeze
        nodes.append(helper.make_node("Unsqueeze", ["image", "axes"], ["image4"]))
        first = "image4"
    nodes += [
        helper.make_node("Conv", [first, "w"], ["picked"]),
        helper.make_node(
            "AveragePool", ["picked"], ["pooled"], kernel_shape=[s, s], strides=[s, s]
        ),
        helper.make_node("Mul", ["pooled", "gain"], ["scaled"]),
        helper.make_node("Add", ["scaled", "eps"], ["p"]),
        helper.make_node("Sub", ["one", "p"], ["q"]),
        helper.make_node("Log", ["p"], ["log_p"]),
        helper.make_node("Log", ["q"], ["log_q"]),
        helper.make_node("Sub", ["log_p", "log_q"], ["heatmap_logits"]),
    ]
    inits = [
        numpy_helper.from_array(weights, "w"),
        numpy_helper.from_array(
            np.array(0.0 if make_zero else sign * 0.97 * 255 / 250, np.float32), "gain"),
        numpy_helper.from_array(np.array(0.5 if make_zero else 1e-4, np.float32), "eps"),
        numpy_helper.from_array(np.array(1.0, np.float32), "one"),
        numpy_helper.from_array(np.array([0], np.int64), "axes"),
    ]
    graph = helper.make_graph(
        nodes,
        "blob_model",
        [helper.make_tensor_value_info("image", TensorProto.FLOAT, shape)],
        [
            helper.make_tensor_value_info(
                "heatmap_logits", TensorProto.FLOAT, [1, k, h // s, w // s]
            )
        ],
        inits,
    )
    model = helper.make_model(graph, opset_imports=[helper.make_opsetid("", 17)])
    model.ir_version = 8
    for key, value in (metadata_props(info) if props is None else props).items():
        entry = model.metadata_props.add()
        entry.key, entry.value = key, value
    return model


def _info(stage: str, names: tuple[str, ...], width: int, overrides: dict[str, Any]) -> ModelInfo:
    fields: dict[str, Any] = {
        "keypoint_names": names,
        "input_width_px": width,
        "input_height_px": 96,
        "mean": (0.0, 0.0, 0.0),
        "std": (1.0, 1.0, 1.0),
        "output_stride": 4,
        "stage": stage,
    }
    fields.update(overrides)
    return ModelInfo(**fields)


def coarse_info(**overrides: Any) -> ModelInfo:
    """A 128x96 coarse model of tip and rear (no normalisation: input = pixel / 255)."""
    return _info("coarse", ("tip", "rear"), 128, overrides)


def refine_info(**overrides: Any) -> ModelInfo:
    """A 96x96 refine model of the tip."""
    return _info("refine", ("tip",), 96, overrides)


@pytest.fixture
def write_model(tmp_path: Path) -> ModelFactory:
    counter = iter(range(10_000))

    def write(info: ModelInfo, name: str | None = None, **kwargs: Any) -> Path:
        path = tmp_path / (name or f"model_{next(counter)}.onnx")
        onnx.save(blob_model_proto(info, **kwargs), str(path))
        return path

    return write


@pytest.fixture
def blob_bundle(write_model: ModelFactory) -> Path:
    """A coarse + refine pair of blob models; returns the coarse path."""
    write_model(refine_info(), name="blob.refine.onnx")
    return write_model(coarse_info(refine_model="blob.refine.onnx"), name="blob.coarse.onnx")


def blob_frame(points: dict[str, tuple[float, float]], sigma_px: float = 6.0) -> np.ndarray:
    """A dark 640x480 BGR frame with a Gaussian blob per keypoint in its channel."""
    yy, xx = np.mgrid[0:480, 0:640].astype(np.float64)
    image = np.full((480, 640, 3), 0.0)
    for name, (x, y) in points.items():
        blob = np.exp(-((xx - x) ** 2 + (yy - y) ** 2) / (2 * sigma_px**2))
        image[:, :, CHANNEL_OF[name]] += 250.0 * blob
    return np.clip(np.round(image), 0, 255).astype(np.uint8)


def json_props(**overrides: str) -> dict[str, str]:
    props = metadata_props(coarse_info())
    props.update(overrides)
    return {k: v for k, v in props.items() if v != "<drop>"}
