"""The keypoint detector edge: a protocol, the two-stage onnxruntime detector and its loader.

Two stages, top-down: a coarse model sees the whole frame downscaled and finds every keypoint
roughly (and whether the tool is there at all); a refine model sees a crop at full resolution
around the tip (the coarse tip, or the caller's last known tip when the coarse pass is unsure)
and places it precisely. A coarse model without a refine companion works alone.

Scores: each keypoint's ``score`` is ``sigmoid(slope * peak_logit + offset)`` of the heatmap
that placed it, with slope/offset fitted at training time by logistic regression on held-out
frames; it estimates the probability that the keypoint is visible in the frame and lies within
the fit radius (see the model metadata's description) of the reported point. When the refine model
ran, the tip's score combines its peak logit with the coarse model's (both weights fitted).

Motion lead: with the caller's last known tip, the tip is moved on by the placing model's
``motion_lead`` times the step from that hint (a blurred fast tip is otherwise placed part-way
back along its streak; see the model contract). A hint further than ``MAX_LEAD_STEP_PX`` away is
not a previous frame's tip of the same move and leads nothing.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass
from importlib import resources
from pathlib import Path
from typing import Protocol, runtime_checkable

import numpy as np
import numpy.typing as npt

from stationcheck.core.records import Frame, Keypoint, Keypoints
from stationcheck.errors import ModelError
from stationcheck.vision.heatmap_decode import cell_to_input_px, decode_peaks
from stationcheck.vision.onnx_model import KeypointModel
from stationcheck.vision.preprocessing import InputWindow, Preprocessor

BUNDLED_MODEL_NAME = "tool_tip.coarse.onnx"
REFINE_GATE_SCORE = 0.05  # below this coarse tip score, the crop follows the caller's hint
MAX_LEAD_STEP_PX = 64.0
TIP_NAME = "tip"


def bundled_model_path() -> Path:
    """The demo model shipped as package data (trained on synthetic demo-station frames)."""
    return Path(str(resources.files("stationcheck.models").joinpath(BUNDLED_MODEL_NAME)))


@runtime_checkable
class KeypointDetector(Protocol):
    """Finds the tool's keypoints in one frame. ``tip_hint_px`` is the last known tip (from the
    tracker): it places the refining crop when the detector itself is unsure, and gives the
    direction of a fast move (motion lead)."""

    keypoint_names: tuple[str, ...]

    def detect(self, frame: Frame, tip_hint_px: tuple[float, float] | None = None) -> Keypoints: ...


@dataclass
class StageTimings:
    """Wall time of the last :meth:`OnnxKeypointDetector.detect` call, per stage."""

    preprocess_ms: float = 0.0
    inference_ms: float = 0.0
    decode_ms: float = 0.0
    refined: bool = False

    @property
    def total_ms(self) -> float:
        return self.preprocess_ms + self.inference_ms + self.decode_ms


class OnnxKeypointDetector:
    """The station's detector: coarse (+ optional refine) ONNX models on the CPU."""

    def __init__(self, coarse: KeypointModel, refine: KeypointModel | None = None) -> None:
        if coarse.info.stage != "coarse":
            raise ModelError(
                f"{coarse.path}: a '{coarse.info.stage}' stage model cannot run alone; "
                "pass its coarse model"
            )
        self.coarse = coarse
        self.refine = refine
        self.keypoint_names = coarse.info.keypoint_names
        if refine is not None:
            if refine.info.stage != "refine":
                raise ModelError(f"{refine.path}: expected a refine stage model")
            unknown = set(refine.info.keypoint_names) - set(self.keypoint_names)
            if unknown:
                raise ModelError(
                    f"{refine.path}: refines keypoints {sorted(unknown)} that the coarse "
                    f"model does not have {list(self.keypoint_names)}"
                )
        self._coarse_pre = Preprocessor(coarse.info)
        self._refine_pre = Preprocessor(refine.info) if refine is not None else None
        self.last_timings = StageTimings()
        self.last_peak_logits: dict[str, float] = {}
        self.last_coarse_points: dict[str, Keypoint] = {}
        self.last_coarse_logits: dict[str, float] = {}

    def detect(self, frame: Frame, tip_hint_px: tuple[float, float] | None = None) -> Keypoints:
        timings = StageTimings()
        t0 = time.perf_counter()
        blob, window = self._coarse_pre.whole_frame(frame.image)
        t1 = time.perf_counter()
        logits = self.coarse.run(blob)
        t2 = time.perf_counter()
        logits_by_name: dict[str, float] = {}
        points = _decode(self.coarse, logits, window, logits_by_name)
        t3 = time.perf_counter()
        self.last_coarse_points = dict(points)
        self.last_coarse_logits = dict(logits_by_name)
        timings.preprocess_ms += (t1 - t0) * 1e3
        timings.inference_ms += (t2 - t1) * 1e3
        timings.decode_ms += (t3 - t2) * 1e3
        if self.refine is not None and self._refine_pre is not None:
            anchor = self.refine.info.keypoint_names[0]
            coarse_point = points[anchor]
            centre: tuple[float, float] | None = None
            if coarse_point.score >= REFINE_GATE_SCORE:
                centre = (coarse_point.x_px, coarse_point.y_px)
            elif tip_hint_px is not None:
                centre = tip_hint_px
            if centre is not None:
                t4 = time.perf_counter()
                blob, window = self._refine_pre.crop(frame.image, *centre)
                t5 = time.perf_counter()
                logits = self.refine.run(blob)
                t6 = time.perf_counter()
                points.update(
                    _decode(self.refine, logits, window, logits_by_name, self.last_coarse_logits)
                )
                t7 = time.perf_counter()
                timings.preprocess_ms += (t5 - t4) * 1e3
                timings.inference_ms += (t6 - t5) * 1e3
                timings.decode_ms += (t7 - t6) * 1e3
                timings.refined = True
        placed_by = self.refine if timings.refined and self.refine is not None else self.coarse
        if tip_hint_px is not None and TIP_NAME in placed_by.info.keypoint_names:
            points[TIP_NAME] = lead_point(points[TIP_NAME], tip_hint_px, placed_by.info.motion_lead)
        self.last_timings = timings
        self.last_peak_logits = logits_by_name
        return Keypoints(
            frame.index, frame.t_s, tuple(points[name] for name in self.keypoint_names)
        )


def lead_point(point: Keypoint, hint_px: tuple[float, float], lead: float) -> Keypoint:
    """``point`` moved on by ``lead`` times its step from ``hint_px`` (unchanged for no lead or
    a step longer than ``MAX_LEAD_STEP_PX``)."""
    dx, dy = point.x_px - hint_px[0], point.y_px - hint_px[1]
    if lead <= 0.0 or math.hypot(dx, dy) > MAX_LEAD_STEP_PX:
        return point
    return Keypoint(point.name, point.x_px + lead * dx, point.y_px + lead * dy, point.score)


def _decode(
    model: KeypointModel,
    logits: npt.NDArray[np.float32],
    window: InputWindow,
    peak_logits: dict[str, float],
    coarse_logits: dict[str, float] | None = None,
) -> dict[str, Keypoint]:
    info = model.info
    out: dict[str, Keypoint] = {}
    for name, peak in zip(info.keypoint_names, decode_peaks(logits), strict=True):
        u = cell_to_input_px(peak.x_cell, info.output_stride)
        v = cell_to_input_px(peak.y_cell, info.output_stride)
        x_px, y_px = window.to_frame(u, v)
        peak_logits[name] = peak.peak_logit
        coarse_logit = coarse_logits.get(name, 0.0) if coarse_logits else 0.0
        score = info.calibration(name).score(peak.peak_logit, coarse_logit)
        out[name] = Keypoint(name, x_px, y_px, score)
    return out


def load_detector(path: Path | str | None = None, threads: int = 1) -> OnnxKeypointDetector:
    """Loads a coarse model and, if its metadata names one, its refine companion file from
    the same directory. ``None`` loads the bundled demo model."""
    coarse_path = Path(path) if path is not None else bundled_model_path()
    coarse = KeypointModel(coarse_path, threads=threads)
    refine = None
    if coarse.info.refine_model:
        refine_path = coarse_path.parent / coarse.info.refine_model
        if not refine_path.is_file():
            raise ModelError(
                f"{coarse_path}: its refine model {coarse.info.refine_model!r} is not next to it"
            )
        refine = KeypointModel(refine_path, threads=threads)
    return OnnxKeypointDetector(coarse, refine)
