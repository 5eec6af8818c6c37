"""Runs a detector over labelled frames and gathers every accuracy figure in one report."""

from __future__ import annotations

import dataclasses
import logging
import math
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np

from stationcheck.evaluation.coco_ap import CocoAp, oks_ap
from stationcheck.evaluation.metrics import TipMetrics, tip_metrics
from stationcheck.evaluation.oks import OKS_AREA_PX2, OKS_SIGMAS
from stationcheck.evaluation.truth import LabelledFrame
from stationcheck.vision.detector import KeypointDetector

logger = logging.getLogger(__name__)


@dataclass(frozen=True)
class EvalReport:
    metrics: TipMetrics
    ap: CocoAp
    min_score: float

    def as_dict(self) -> dict[str, Any]:
        out: dict[str, Any] = dataclasses.asdict(self.metrics)
        out.update(
            oks_ap=self.ap.ap,
            oks_ap50=self.ap.ap50,
            oks_ap75=self.ap.ap75,
            min_score=self.min_score,
            oks_area_px2=OKS_AREA_PX2,
            oks_sigmas=dict(OKS_SIGMAS),
        )
        return {k: (None if isinstance(v, float) and math.isnan(v) else v) for k, v in out.items()}


def evaluate(
    detector: KeypointDetector,
    frames: Iterable[LabelledFrame],
    min_score: float = 0.5,
    follow: bool = True,
    on_frame: Callable[[int], None] | None = None,
) -> EvalReport:
    """``follow`` hands the previous frame's detected tip to the detector as its hint, as the
    tracker does at the station (only across consecutive frame indices)."""
    names = detector.keypoint_names
    truth, predicted, scores = [], [], []
    last_index, hint = -2, None
    for count, item in enumerate(frames, start=1):
        if item.frame.index != last_index + 1:
            hint = None
        result = detector.detect(item.frame, hint if follow else None)
        rows = np.array(
            [[p.x_px, p.y_px, p.score] for p in (result.get(n) for n in names) if p is not None]
        )
        tip = result.get("tip")
        hint = (tip.x_px, tip.y_px) if tip is not None and tip.score >= min_score else None
        last_index = item.frame.index
        truth.append(item.truth)
        predicted.append(rows)
        scores.append(tip.score if tip is not None else 0.0)
        if on_frame is not None:
            on_frame(count)
    if not truth:
        raise ValueError("no labelled frames to evaluate")
    metrics = tip_metrics(truth, predicted, min_score, names)
    ap = oks_ap(truth, [p[:, :2] for p in predicted], scores, names)
    logger.info(
        "evaluated %d frames: tip median %.2f px, p95 %.2f px, AP %.3f",
        metrics.frames,
        metrics.tip_median_px,
        metrics.tip_p95_px,
        ap.ap,
    )
    return EvalReport(metrics, ap, min_score)
