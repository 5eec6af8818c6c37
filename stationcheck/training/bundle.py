"""Turns trained networks into the model bundle: two ONNX files (coarse names its refine
companion in its metadata) with calibrated scores."""

from __future__ import annotations

import dataclasses
import logging
from pathlib import Path

import numpy as np
import numpy.typing as npt

from stationcheck.core.records import Frame, Keypoint
from stationcheck.training.augment import NoiseBank, augment_frame
from stationcheck.training.calibration import CalibrationSamples
from stationcheck.training.export import export_onnx, write_metadata
from stationcheck.training.loop import KEYPOINT_NAMES, TrainConfig, TrainResult
from stationcheck.training.samples import FrameSource
from stationcheck.vision.detector import load_detector
from stationcheck.vision.model_contract import ScoreCalibration

logger = logging.getLogger(__name__)

# A keypoint counts as correct for calibration within these frame-pixel radii: the coarse tip
# only has to land the refining crop; rear and refined tip are reported to the tracker.
COARSE_TIP_RADIUS_PX = 24.0
REAR_RADIUS_PX = 10.0
TIP_RADIUS_PX = 10.0


def write_bundle(
    result: TrainResult,
    config: TrainConfig,
    out_dir: Path,
    calibration_source: FrameSource,
    calibration_frames: int = 400,
) -> Path:
    """Exports, calibrates on held-out frames and returns the coarse model's path."""
    out_dir.mkdir(parents=True, exist_ok=True)
    coarse_info = config.coarse_info()
    refine_info = config.refine_info()
    coarse_path = out_dir / f"{config.model_name}.coarse.onnx"
    refine_path = out_dir / coarse_info.refine_model
    export_onnx(result.coarse, coarse_info, coarse_path)
    export_onnx(result.refine, refine_info, refine_path)
    samples = collect_calibration(coarse_path, calibration_source, config.seed, calibration_frames)
    fitted = samples.fit()
    description = (
        f"stationcheck tool keypoint model, stage {{stage}}; trained {result.steps} steps "
        f"(seed {config.seed}). score = sigmoid(slope*peak_logit + offset, plus "
        f"coarse_slope*coarse_peak_logit for a refined tip): estimated probability that the "
        f"keypoint is visible and within {TIP_RADIUS_PX:g} px (tip, rear {REAR_RADIUS_PX:g} px) "
        f"of the reported point; the coarse-only tip score uses {COARSE_TIP_RADIUS_PX:g} px."
    )
    write_metadata(
        coarse_path,
        dataclasses.replace(
            coarse_info,
            description=description.format(stage="coarse"),
            score_calibration={"tip": _get(fitted, "coarse:tip"), "rear": _get(fitted, "rear")},
        ),
    )
    write_metadata(
        refine_path,
        dataclasses.replace(
            refine_info,
            description=description.format(stage="refine"),
            score_calibration={"tip": _get(fitted, "tip")},
        ),
    )
    return coarse_path


def collect_calibration(
    coarse_path: Path, source: FrameSource, seed: int, frames: int
) -> CalibrationSamples:
    """Runs the exported (uncalibrated) detector on held-out augmented frames."""
    detector = load_detector(coarse_path, threads=1)
    rng = np.random.default_rng([seed, 0xCA11B])
    noise = NoiseBank(rng)
    samples = CalibrationSamples()
    for index in range(frames):
        image, kps = source.sample(rng)
        image, kps = augment_frame(rng, image, kps, noise)
        result = detector.detect(Frame(index, index / 30.0, image))
        for name, radius in (("tip", TIP_RADIUS_PX), ("rear", REAR_RADIUS_PX)):
            point = result.get(name)
            refined_tip = name == "tip" and detector.last_timings.refined
            if point is not None and (name != "tip" or refined_tip or detector.refine is None):
                coarse_logit = detector.last_coarse_logits["tip"] if refined_tip else None
                hit = _hit(point, kps, name, radius)
                samples.add(name, detector.last_peak_logits[name], hit, coarse_logit)
        coarse_tip = detector.last_coarse_points["tip"]
        samples.add(
            "coarse:tip",
            detector.last_coarse_logits["tip"],
            _hit(coarse_tip, kps, "tip", COARSE_TIP_RADIUS_PX),
        )
    return samples


def _hit(point: Keypoint, kps: npt.NDArray[np.float64], name: str, radius_px: float) -> bool:
    row = kps[KEYPOINT_NAMES.index(name)]
    return bool(row[2] == 2 and np.hypot(point.x_px - row[0], point.y_px - row[1]) <= radius_px)


def _get(fitted: dict[str, ScoreCalibration], name: str) -> ScoreCalibration:
    if name not in fitted:
        logger.warning("no calibration samples for %s; its score stays the plain sigmoid", name)
    return fitted.get(name, ScoreCalibration())
