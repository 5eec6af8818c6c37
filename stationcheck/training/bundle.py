"""Turns trained networks into the model bundle: two ONNX files (coarse names its refine
companion in its metadata) with calibrated scores and, given frames of fast moves, the refine
model's motion lead."""

from __future__ import annotations

import dataclasses
import logging
import math
from pathlib import Path

import numpy as np
import numpy.typing as npt

from stationcheck.core.records import Frame, Keypoint
from stationcheck.training.augment import NoiseBank, augment_frame
from stationcheck.training.calibration import CalibrationSamples
from stationcheck.training.export import export_onnx, write_metadata
from stationcheck.training.loop import KEYPOINT_NAMES, TrainConfig, TrainResult
from stationcheck.training.samples import FrameSource, MovingSampleFn
from stationcheck.vision.detector import load_detector
from stationcheck.vision.model_contract import ScoreCalibration
from stationcheck.vision.onnx_model import KeypointModel

logger = logging.getLogger(__name__)

# A keypoint counts as correct for calibration within these frame-pixel radii: the coarse tip
# only has to land the refining crop; rear and refined tip are reported to the tracker.
COARSE_TIP_RADIUS_PX = 24.0
REAR_RADIUS_PX = 10.0
TIP_RADIUS_PX = 10.0
# Motion lead: measured on fast-move frames whose tip the detector finds (score >= this);
# a placement further off than one step is a gross error, not lag, and is left out.
LEAD_MIN_SCORE = 0.5
LEAD_CAP = 0.5  # a larger measured lead means the frames were not lag but errors


def write_bundle(
    result: TrainResult,
    config: TrainConfig,
    out_dir: Path,
    calibration_source: FrameSource,
    calibration_frames: int = 400,
    moving_sample: MovingSampleFn | None = None,
    motion_frames: int = 400,
) -> Path:
    """Exports, calibrates on held-out frames, measures the motion lead when frames of fast
    moves are at hand, and returns the coarse model's path."""
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
    if moving_sample is not None:
        write_motion_lead(
            coarse_path, measure_motion_lead(coarse_path, moving_sample, config.seed, motion_frames)
        )
    return coarse_path


def measure_motion_lead(
    coarse_path: Path, moving_sample: MovingSampleFn, seed: int, frames: int
) -> float:
    """The lead that cancels the detector's lag behind a fast-moving tip.

    On held-out frames of known fast steps, the detector (without a hint) places the tip
    ``lag`` times the step back along the move (median over found tips). At the station the
    hint is the previous frame's led tip, so the step seen from it is ``(1 - lag)`` of the true
    one, and a lead of ``lag / (1 - lag)`` puts the tip back on the label.
    """
    detector = load_detector(coarse_path, threads=1)
    rng = np.random.default_rng([seed, 0x1EAD])
    ratios = []
    for index in range(frames):
        image, kps, step = moving_sample(rng)
        speed = math.hypot(*step)
        tip = detector.detect(Frame(index, index / 30.0, image)).get("tip")
        if kps[0, 2] != 2 or speed < 1.0 or tip is None or tip.score < LEAD_MIN_SCORE:
            continue
        dx, dy = tip.x_px - float(kps[0, 0]), tip.y_px - float(kps[0, 1])
        along = (dx * step[0] + dy * step[1]) / speed
        if math.hypot(dx, dy) <= speed:
            ratios.append(along / speed)
    if not ratios:
        logger.warning("motion lead: no fast-move frame was found; no lead")
        return 0.0
    lag = -float(np.median(ratios))
    lead = min(max(lag / (1.0 - lag), 0.0), LEAD_CAP) if lag < 1.0 else LEAD_CAP
    logger.info(
        "motion lead %.3f (tip placed %.3f of the step back; %d of %d frames)",
        lead,
        lag,
        len(ratios),
        frames,
    )
    return lead


def write_motion_lead(coarse_path: Path, lead: float) -> None:
    """Stores ``lead`` in the metadata of the model that places the tip (refine if any)."""
    coarse = KeypointModel(coarse_path)
    refine_name = coarse.info.refine_model
    path = coarse_path.parent / refine_name if refine_name else coarse_path
    info = coarse.info if not refine_name else KeypointModel(path).info
    write_metadata(path, dataclasses.replace(info, motion_lead=round(lead, 4)))


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
