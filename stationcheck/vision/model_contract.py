"""The keypoint model contract: what an ONNX model file must say about itself.

A model keeps the contract when its ``metadata_props`` (strings only; lists and objects as
JSON) hold the keys below and its one input and one output have the shapes they announce.
The runtime reads these with onnxruntime, the training code writes them with the ``onnx``
package; both go through this module so the two sides cannot drift apart.

Input: one RGB image, NCHW float32, ``1 x 3 x input_height x input_width``, computed from 8-bit
pixels as ``(pixel / 255 - mean) / std`` per channel. Output: ``1 x K x H/stride x W/stride``
heatmap logits, one channel per keypoint name; ``sigmoid(logit)`` is the model's estimate of a
Gaussian bump (peak 1) centred on the keypoint. Heatmap cell ``j`` is centred on input pixel
``j * stride + (stride - 1) / 2`` (pixel centres at integer coordinates).

Stages: a ``coarse`` model sees the whole frame resized to its input size; a ``refine`` model
sees a crop of ``input_size * crop_scale`` frame pixels around a point. A coarse model may name
a refine companion file (same directory) in ``refine_model``.

Motion lead (optional, default 0): a blurred tip moving fast is ambiguous in one frame (the
streak looks the same whichever end is the front), so a model places it part-way back along its
streak. ``motion_lead`` is the fraction of the step from the caller's last known tip that the
detector adds to the tip this model places, measured at training time on held-out frames.
"""

from __future__ import annotations

import json
import math
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any, Literal

from stationcheck.errors import ModelError

FORMAT_VERSION = 1
Stage = Literal["coarse", "refine"]
STAGES: tuple[Stage, ...] = ("coarse", "refine")

KEY_FORMAT_VERSION = "stationcheck.format_version"
KEY_KEYPOINT_NAMES = "keypoint_names"
KEY_INPUT_SIZE = "input_size"
KEY_NORMALISATION = "normalisation"
KEY_OUTPUT_STRIDE = "output_stride"
KEY_STAGE = "stage"
KEY_CROP_SCALE = "crop_scale"
KEY_SCORE_CALIBRATION = "score_calibration"
KEY_REFINE_MODEL = "refine_model"
KEY_DESCRIPTION = "description"
KEY_MOTION_LEAD = "motion_lead"
MAX_MOTION_LEAD = 1.0

REQUIRED_KEYS = (
    KEY_FORMAT_VERSION,
    KEY_KEYPOINT_NAMES,
    KEY_INPUT_SIZE,
    KEY_NORMALISATION,
    KEY_OUTPUT_STRIDE,
    KEY_STAGE,
)


@dataclass(frozen=True)
class ScoreCalibration:
    """Maps a heatmap peak logit to a score:
    ``sigmoid(slope * peak_logit + coarse_slope * coarse_peak_logit + offset)``.

    Fitted by logistic regression on held-out labelled frames, so the score estimates the
    probability that the keypoint is visible and within the fit's radius of the reported point.
    ``coarse_slope`` (refine models only) weighs in the coarse model's peak logit for the same
    keypoint: the coarse pass sees the whole tool, the refine pass only the crop. The identity
    (slope 1, offset 0, coarse_slope 0) is the plain sigmoid of the peak.
    """

    slope: float = 1.0
    offset: float = 0.0
    coarse_slope: float = 0.0

    def __post_init__(self) -> None:
        values = (self.slope, self.offset, self.coarse_slope)
        if not all(math.isfinite(v) for v in values) or self.slope <= 0 or self.coarse_slope < 0:
            raise ValueError(
                "score calibration needs a finite slope > 0, coarse slope >= 0 and offset, "
                f"got slope={self.slope} offset={self.offset} coarse_slope={self.coarse_slope}"
            )

    def as_list(self) -> list[float]:
        if self.coarse_slope:
            return [self.slope, self.offset, self.coarse_slope]
        return [self.slope, self.offset]

    def score(self, peak_logit: float, coarse_peak_logit: float = 0.0) -> float:
        z = self.slope * peak_logit + self.coarse_slope * coarse_peak_logit + self.offset
        if z >= 0:
            return 1.0 / (1.0 + math.exp(-z))
        e = math.exp(z)
        return e / (1.0 + e)


@dataclass(frozen=True)
class ModelInfo:
    """What a keypoint model says about itself (validated)."""

    keypoint_names: tuple[str, ...]
    input_width_px: int
    input_height_px: int
    mean: tuple[float, float, float]
    std: tuple[float, float, float]
    output_stride: int
    stage: Stage = "coarse"
    crop_scale: float = 1.0
    score_calibration: Mapping[str, ScoreCalibration] = field(default_factory=dict)
    refine_model: str = ""
    description: str = ""
    format_version: int = FORMAT_VERSION
    motion_lead: float = 0.0

    def __post_init__(self) -> None:
        problems = _problems(self)
        if problems:
            raise ValueError("; ".join(problems))

    @property
    def heatmap_width(self) -> int:
        return self.input_width_px // self.output_stride

    @property
    def heatmap_height(self) -> int:
        return self.input_height_px // self.output_stride

    def calibration(self, name: str) -> ScoreCalibration:
        return self.score_calibration.get(name, ScoreCalibration())


def _problems(info: ModelInfo) -> list[str]:
    problems: list[str] = []
    if info.format_version != FORMAT_VERSION:
        problems.append(
            f"format version {info.format_version} is not supported (expected {FORMAT_VERSION})"
        )
    names = info.keypoint_names
    if not names or not all(isinstance(n, str) and n for n in names):
        problems.append(f"keypoint names must be non-empty strings, got {list(names)}")
    elif len(set(names)) != len(names):
        problems.append(f"keypoint names must be unique, got {list(names)}")
    if info.output_stride < 1:
        problems.append(f"output stride must be >= 1, got {info.output_stride}")
    else:
        for label, size in (("width", info.input_width_px), ("height", info.input_height_px)):
            if size < info.output_stride or size % info.output_stride:
                problems.append(
                    f"input {label} {size} must be a positive multiple of the output stride "
                    f"{info.output_stride}"
                )
    if len(info.mean) != 3 or len(info.std) != 3:
        problems.append("normalisation needs 3 mean and 3 std values")
    elif not all(math.isfinite(s) and s > 0 for s in info.std):
        problems.append(f"normalisation std values must be > 0, got {list(info.std)}")
    if info.stage not in STAGES:
        problems.append(f"stage must be one of {list(STAGES)}, got {info.stage!r}")
    if not (math.isfinite(info.crop_scale) and info.crop_scale > 0):
        problems.append(f"crop scale must be > 0, got {info.crop_scale}")
    if not (math.isfinite(info.motion_lead) and 0.0 <= info.motion_lead <= MAX_MOTION_LEAD):
        problems.append(
            f"motion lead must be within [0, {MAX_MOTION_LEAD:g}], got {info.motion_lead}"
        )
    unknown = set(info.score_calibration) - set(names)
    if unknown:
        problems.append(f"score calibration names unknown keypoints {sorted(unknown)}")
    return problems


def metadata_props(info: ModelInfo) -> dict[str, str]:
    """The ``metadata_props`` strings that describe ``info`` in an ONNX file."""
    props = {
        KEY_FORMAT_VERSION: str(info.format_version),
        KEY_KEYPOINT_NAMES: json.dumps(list(info.keypoint_names)),
        KEY_INPUT_SIZE: json.dumps([info.input_width_px, info.input_height_px]),
        KEY_NORMALISATION: json.dumps({"mean": list(info.mean), "std": list(info.std)}),
        KEY_OUTPUT_STRIDE: str(info.output_stride),
        KEY_STAGE: info.stage,
        KEY_CROP_SCALE: repr(float(info.crop_scale)),
        KEY_SCORE_CALIBRATION: json.dumps(
            {n: c.as_list() for n, c in info.score_calibration.items()}
        ),
    }
    if info.refine_model:
        props[KEY_REFINE_MODEL] = info.refine_model
    if info.description:
        props[KEY_DESCRIPTION] = info.description
    if info.motion_lead:
        props[KEY_MOTION_LEAD] = repr(float(info.motion_lead))
    return props


def parse_metadata(props: Mapping[str, str], source: str = "model") -> ModelInfo:
    """Reads and validates the contract; raises :class:`ModelError` with one clear line."""
    missing = [key for key in REQUIRED_KEYS if key not in props]
    if missing:
        raise ModelError(
            f"{source}: not a stationcheck keypoint model (metadata lacks {', '.join(missing)})"
        )
    try:
        names = _json(props, KEY_KEYPOINT_NAMES)
        size = _json(props, KEY_INPUT_SIZE)
        norm = _json(props, KEY_NORMALISATION)
        calib_raw = _json(props, KEY_SCORE_CALIBRATION) if KEY_SCORE_CALIBRATION in props else {}
        if not isinstance(names, list):
            raise TypeError(f"{KEY_KEYPOINT_NAMES} must be a JSON list, got {names!r}")
        if not (isinstance(size, list) and len(size) == 2 and all(type(v) is int for v in size)):
            raise TypeError(f"{KEY_INPUT_SIZE} must be [width, height] integers, got {size!r}")
        if not (isinstance(norm, dict) and {"mean", "std"} <= set(norm)):
            raise TypeError(f"{KEY_NORMALISATION} must be {{'mean': [..], 'std': [..]}}")
        if not isinstance(calib_raw, dict):
            raise TypeError(f"{KEY_SCORE_CALIBRATION} must be a JSON object")
        calibration = {
            str(name): ScoreCalibration(*(float(v) for v in _weights(values)))
            for name, values in calib_raw.items()
        }
        return ModelInfo(
            keypoint_names=tuple(names),
            input_width_px=size[0],
            input_height_px=size[1],
            mean=_triple(norm["mean"]),
            std=_triple(norm["std"]),
            output_stride=int(props[KEY_OUTPUT_STRIDE]),
            stage=props[KEY_STAGE],  # type: ignore[arg-type]  # checked in ModelInfo
            crop_scale=float(props.get(KEY_CROP_SCALE, "1.0")),
            score_calibration=calibration,
            refine_model=props.get(KEY_REFINE_MODEL, ""),
            description=props.get(KEY_DESCRIPTION, ""),
            format_version=int(props[KEY_FORMAT_VERSION]),
            motion_lead=float(props.get(KEY_MOTION_LEAD, "0.0")),
        )
    except (ValueError, TypeError, KeyError, IndexError) as exc:
        raise ModelError(f"{source}: ill-formed model metadata: {exc}") from exc


def _json(props: Mapping[str, str], key: str) -> Any:
    try:
        return json.loads(props[key])
    except json.JSONDecodeError as exc:
        raise ValueError(f"{key} is not valid JSON ({props[key]!r})") from exc


def _weights(values: Any) -> list[float]:
    if not isinstance(values, list) or len(values) not in (2, 3):
        raise TypeError(f"a score calibration is [slope, offset(, coarse_slope)], got {values!r}")
    return [float(v) for v in values]


def _triple(values: Any) -> tuple[float, float, float]:
    if not isinstance(values, list) or len(values) != 3:
        raise TypeError(f"normalisation values must be a list of 3 numbers, got {values!r}")
    a, b, c = (float(v) for v in values)
    return (a, b, c)
