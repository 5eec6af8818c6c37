"""ONNX export with the model contract's metadata.

TorchScript exporter (``dynamo=False``), opset 17: it needs no extra package, handles every
layer of :class:`~stationcheck.training.network.HeatmapNet`, and matches torch to ~1e-5 in the
logits. The input has a fixed 1 x 3 x H x W shape because the metadata announces one size.
"""

from __future__ import annotations

import logging
import warnings
from pathlib import Path

import onnx
import torch

from stationcheck.vision.model_contract import ModelInfo, metadata_props

logger = logging.getLogger(__name__)

OPSET = 17
INPUT_NAME = "image"
OUTPUT_NAME = "heatmap_logits"


def export_onnx(model: torch.nn.Module, info: ModelInfo, path: Path) -> Path:
    """Writes ``model`` to ``path`` (CPU, eval mode, contiguous weights) with ``info``."""
    model = model.to(memory_format=torch.contiguous_format).eval()  # type: ignore[call-overload]
    dummy = torch.zeros(1, 3, info.input_height_px, info.input_width_px)
    path.parent.mkdir(parents=True, exist_ok=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the TorchScript exporter announces its deprecation
        torch.onnx.export(
            model,
            (dummy,),
            str(path),
            opset_version=OPSET,
            dynamo=False,
            input_names=[INPUT_NAME],
            output_names=[OUTPUT_NAME],
            do_constant_folding=True,
        )
    write_metadata(path, info)
    logger.info("exported %s model to %s (%.0f kB)", info.stage, path, path.stat().st_size / 1e3)
    return path


def write_metadata(path: Path, info: ModelInfo) -> None:
    """Replaces the file's metadata_props with ``info`` (other props are kept)."""
    proto = onnx.load(str(path))
    props = metadata_props(info)
    kept = [p for p in proto.metadata_props if p.key not in props]
    del proto.metadata_props[:]
    proto.metadata_props.extend(kept)
    for key, value in props.items():
        entry = proto.metadata_props.add()
        entry.key, entry.value = key, value
    proto.producer_name = "stationcheck"
    onnx.checker.check_model(proto)
    onnx.save(proto, str(path))
