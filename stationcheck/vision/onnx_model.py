"""One keypoint model file under onnxruntime's CPU provider, checked against the contract."""

from __future__ import annotations

import logging
from pathlib import Path

import numpy as np
import numpy.typing as npt
import onnxruntime as ort

from stationcheck.errors import ModelError, ModelOutputError, first_line
from stationcheck.vision.model_contract import ModelInfo, parse_metadata

logger = logging.getLogger(__name__)


def session_options(threads: int) -> ort.SessionOptions:
    if threads < 1:
        raise ModelError(f"threads must be >= 1, got {threads}")
    options = ort.SessionOptions()
    options.intra_op_num_threads = threads
    options.inter_op_num_threads = 1
    options.execution_mode = ort.ExecutionMode.ORT_SEQUENTIAL
    options.graph_optimization_level = ort.GraphOptimizationLevel.ORT_ENABLE_ALL
    options.log_severity_level = 3
    return options


class KeypointModel:
    """Loads a model, refuses it with one clear line if it breaks the contract, runs it."""

    def __init__(self, path: Path | str, threads: int = 1) -> None:
        self.path = Path(path)
        if not self.path.is_file():
            raise ModelError(f"model file not found: {self.path}")
        try:
            self._session = ort.InferenceSession(
                str(self.path),
                sess_options=session_options(threads),
                providers=["CPUExecutionProvider"],
            )
        except Exception as exc:  # onnxruntime raises its own untyped errors
            raise ModelError(
                f"{self.path}: not a readable ONNX model ({first_line(exc)[:200]})"
            ) from exc
        meta = self._session.get_modelmeta().custom_metadata_map
        self.info: ModelInfo = parse_metadata(meta, source=str(self.path))
        self._input_name = self._check_input()
        self._output_name = self._check_output()
        logger.info(
            "loaded %s model %s: input %dx%d, keypoints %s, stride %d, %d thread(s)",
            self.info.stage,
            self.path.name,
            self.info.input_width_px,
            self.info.input_height_px,
            list(self.info.keypoint_names),
            self.info.output_stride,
            threads,
        )

    def _check_input(self) -> str:
        inputs = self._session.get_inputs()
        if len(inputs) != 1:
            raise ModelError(f"{self.path}: expected 1 input, the model has {len(inputs)}")
        node = inputs[0]
        expected = [1, 3, self.info.input_height_px, self.info.input_width_px]
        if node.type != "tensor(float)":
            raise ModelError(f"{self.path}: input must be float32, got {node.type}")
        if not _shape_matches(node.shape, expected):
            raise ModelError(
                f"{self.path}: input shape {node.shape} does not match the metadata "
                f"(expected {expected}, NCHW RGB)"
            )
        return str(node.name)

    def _check_output(self) -> str:
        outputs = self._session.get_outputs()
        if not outputs:
            raise ModelError(f"{self.path}: the model has no output")
        node = outputs[0]
        if not _shape_matches(node.shape, self.expected_output_shape):
            raise ModelError(
                f"{self.path}: output shape {node.shape} does not match the metadata "
                f"(expected {self.expected_output_shape}: keypoints x input size / stride)"
            )
        return str(node.name)

    @property
    def expected_output_shape(self) -> list[int]:
        i = self.info
        return [1, len(i.keypoint_names), i.heatmap_height, i.heatmap_width]

    def run(self, blob: npt.NDArray[np.float32]) -> npt.NDArray[np.float32]:
        """Heatmap logits ``K x H x W`` for one ``1 x 3 x H x W`` blob."""
        (heatmaps,) = self._session.run([self._output_name], {self._input_name: blob})
        out: npt.NDArray[np.float32] = np.asarray(heatmaps, dtype=np.float32)
        if list(out.shape) != self.expected_output_shape:
            raise ModelError(
                f"{self.path}: output shape {list(out.shape)} at run time does not match the "
                f"metadata (expected {self.expected_output_shape})"
            )
        if not np.isfinite(out).all():
            raise ModelOutputError(f"{self.path.name}: the model produced NaN or infinite output")
        if not out.any():
            raise ModelOutputError(f"{self.path.name}: the model produced all-zero output")
        return np.asarray(out[0], dtype=np.float32)


def _shape_matches(actual: list[object], expected: list[int]) -> bool:
    """Static dims must equal; a symbolic batch dim is accepted, other symbolic dims are not."""
    if len(actual) != len(expected):
        return False
    for index, (a, e) in enumerate(zip(actual, expected, strict=True)):
        if isinstance(a, int):
            if a != e:
                return False
        elif index != 0:
            return False
    return True
