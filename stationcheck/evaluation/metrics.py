"""Tip accuracy figures over labelled frames.

Per frame the truth is ``K x 3`` (x_px, y_px, COCO v) and the prediction ``K x 3``
(x_px, y_px, score); a keypoint is *detected* when its score reaches ``min_score``.

- tip error: Euclidean distance in frame pixels, over frames where the tip is visible (v=2)
  and detected; median and 95th percentile (linear interpolation, numpy's default).
- PCK@r: share of visible-tip frames whose tip is detected within r px (a miss counts as a
  failure).
- miss rate: visible tip, not detected. False detection rate: no tip in view (v=0), detected.
  Frames with a hidden but labelled tip (v=1, e.g. under the hand) count in neither rate.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import numpy.typing as npt

PCK_RADII_PX = (2.0, 5.0, 10.0)


@dataclass(frozen=True)
class TipMetrics:
    frames: int
    visible_frames: int
    hidden_frames: int
    absent_frames: int
    tip_median_px: float
    tip_p95_px: float
    tip_max_px: float
    pck_2px: float
    pck_5px: float
    pck_10px: float
    miss_rate: float
    false_detection_rate: float
    rear_median_px: float


def _rate(numerator: int, denominator: int) -> float:
    return numerator / denominator if denominator else float("nan")


def tip_metrics(
    truth: Sequence[npt.NDArray[np.float64]],
    predicted: Sequence[npt.NDArray[np.float64]],
    min_score: float,
    names: tuple[str, ...] = ("tip", "rear"),
) -> TipMetrics:
    if len(truth) != len(predicted):
        raise ValueError(f"{len(truth)} truth rows but {len(predicted)} predictions")
    tip, rear = names.index("tip"), names.index("rear") if "rear" in names else None
    t = np.asarray(truth, dtype=np.float64).reshape(len(truth), len(names), 3)
    p = np.asarray(predicted, dtype=np.float64).reshape(len(predicted), len(names), 3)
    visible = t[:, tip, 2] == 2
    hidden = t[:, tip, 2] == 1
    absent = t[:, tip, 2] == 0
    detected = p[:, tip, 2] >= min_score
    error = np.hypot(p[:, tip, 0] - t[:, tip, 0], p[:, tip, 1] - t[:, tip, 1])
    scored = error[visible & detected]
    pck = [
        _rate(int(((error <= r) & visible & detected).sum()), int(visible.sum()))
        for r in PCK_RADII_PX
    ]
    rear_median = float("nan")
    if rear is not None:
        rear_ok = (t[:, rear, 2] == 2) & (p[:, rear, 2] >= min_score)
        rear_err = np.hypot(p[:, rear, 0] - t[:, rear, 0], p[:, rear, 1] - t[:, rear, 1])
        if rear_ok.any():
            rear_median = float(np.median(rear_err[rear_ok]))
    nan = float("nan")
    return TipMetrics(
        frames=len(truth),
        visible_frames=int(visible.sum()),
        hidden_frames=int(hidden.sum()),
        absent_frames=int(absent.sum()),
        tip_median_px=float(np.median(scored)) if scored.size else nan,
        tip_p95_px=float(np.percentile(scored, 95)) if scored.size else nan,
        tip_max_px=float(scored.max()) if scored.size else nan,
        pck_2px=pck[0],
        pck_5px=pck[1],
        pck_10px=pck[2],
        miss_rate=_rate(int((visible & ~detected).sum()), int(visible.sum())),
        false_detection_rate=_rate(int((absent & detected).sum()), int(absent.sum())),
        rear_median_px=rear_median,
    )
