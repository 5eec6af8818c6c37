"""Trainable weights back from an exported keypoint model.

An exported model keeps every weight as an ONNX initializer, with each batch norm folded into
its convolution (eval mode, constant folding). Reading the convolutions in graph order and
loading them into a :class:`~stationcheck.training.network.HeatmapNet` built ``folded=True``
gives a network that computes the same logits as the file, which training can then go on from:
a station's own model starts from the bundled one instead of from scratch.

The rebuilt network is checked against onnxruntime on the file itself before it is returned, so
a model of another architecture is refused with one line instead of being trained wrongly.
"""

from __future__ import annotations

import logging
from pathlib import Path

import numpy as np
import onnx
import torch
from onnx import numpy_helper
from torch import nn

from stationcheck.errors import ModelError
from stationcheck.training.network import HeatmapNet
from stationcheck.vision.model_contract import ModelInfo, parse_metadata

logger = logging.getLogger(__name__)

# Largest logit difference between the file and the rebuilt network that still counts as the
# same model (float32 arithmetic in a different order: ~1e-5 seen).
MAX_LOGIT_DIFFERENCE = 1e-3


def rebuild_network(path: Path) -> tuple[HeatmapNet, ModelInfo]:
    """The network in ``path`` as a trainable, folded HeatmapNet, and the model's contract."""
    try:
        proto = onnx.load(str(path))
    except (OSError, onnx.onnx_cpp2py_export.checker.ValidationError, ValueError) as exc:
        raise ModelError(f"{path}: cannot read the model to train from: {exc}") from exc
    except Exception as exc:  # protobuf's DecodeError has no stable import path
        raise ModelError(f"{path}: not an ONNX model ({exc})") from exc
    props = {p.key: p.value for p in proto.metadata_props}
    try:
        info = parse_metadata(props, source=str(path))
    except ValueError as exc:
        raise ModelError(f"{path}: {exc}") from exc
    weights = {init.name: numpy_helper.to_array(init) for init in proto.graph.initializer}
    convs = [node for node in proto.graph.node if node.op_type == "Conv"]
    kernels = [weights.get(node.input[1]) for node in convs]
    if not kernels or any(k is None or k.ndim != 4 for k in kernels):
        raise ModelError(f"{path}: not a heatmap network this version can train from")
    widths = _widths(path, [k.shape[0] for k in kernels if k is not None])
    net = HeatmapNet(
        len(info.keypoint_names), widths, output_stride=info.output_stride, folded=True
    )
    layers = [m for m in net.modules() if isinstance(m, nn.Conv2d)]
    if len(layers) != len(convs):
        raise ModelError(
            f"{path}: {len(convs)} convolutions, the trainable network has {len(layers)}"
        )
    with torch.no_grad():
        for layer, node in zip(layers, convs, strict=True):
            kernel = weights[node.input[1]]
            bias = weights.get(node.input[2]) if len(node.input) > 2 else None
            if tuple(layer.weight.shape) != kernel.shape or bias is None:
                raise ModelError(f"{path}: convolution {node.name!r} does not fit the network")
            layer.weight.copy_(torch.from_numpy(np.array(kernel, dtype=np.float32)))
            assert layer.bias is not None
            layer.bias.copy_(torch.from_numpy(np.array(bias, dtype=np.float32)))
    _check_same_logits(path, net, info)
    logger.info("rebuilt trainable weights from %s (%s stage)", path, info.stage)
    return net, info


def _widths(path: Path, out_channels: list[int]) -> tuple[int, int, int, int]:
    # graph order: down2 (2 convs), down4 (2), down8 (2), down16 (2), fuse8, fuse4, [fuse2], head
    if len(out_channels) < 10:
        raise ModelError(f"{path}: not a heatmap network this version can train from")
    w2, w4, w8, w16 = out_channels[0], out_channels[2], out_channels[4], out_channels[6]
    return w2, w4, w8, w16


def _check_same_logits(path: Path, net: HeatmapNet, info: ModelInfo) -> None:
    import onnxruntime as ort

    rng = np.random.default_rng(0)
    x = rng.normal(0.0, 1.0, (1, 3, info.input_height_px, info.input_width_px)).astype(np.float32)
    options = ort.SessionOptions()
    options.intra_op_num_threads = 1
    session = ort.InferenceSession(str(path), options, providers=["CPUExecutionProvider"])
    expected = session.run(None, {session.get_inputs()[0].name: x})[0]
    net.eval()
    with torch.no_grad():
        got = net(torch.from_numpy(x)).numpy()
    if got.shape != expected.shape:
        raise ModelError(
            f"{path}: rebuilt output {got.shape} differs from the file's {expected.shape}"
        )
    difference = float(np.max(np.abs(got - expected)))
    if not difference <= MAX_LOGIT_DIFFERENCE:
        raise ModelError(
            f"{path}: rebuilt network differs from the file by {difference:.2g} in the logits"
        )
