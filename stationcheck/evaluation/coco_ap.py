"""COCO keypoint AP through pycocotools (the reference COCO evaluation), with stationcheck's
OKS sigmas and area (see :mod:`stationcheck.evaluation.oks`)."""

from __future__ import annotations

import contextlib
import io
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import numpy.typing as npt

from stationcheck.errors import MissingExtraError
from stationcheck.evaluation.oks import OKS_AREA_PX2, sigmas_for

CATEGORY_ID = 1
CATEGORY_NAME = "fastening_tool"


@dataclass(frozen=True)
class CocoAp:
    ap: float  # AP averaged over OKS thresholds 0.50:0.05:0.95
    ap50: float
    ap75: float


def coco_ground_truth(
    truth: Sequence[npt.NDArray[np.float64]], names: tuple[str, ...], area_px2: float = OKS_AREA_PX2
) -> dict[str, Any]:
    """A COCO keypoint dataset dict: one image per frame, one object where any keypoint is
    labelled (v > 0)."""
    images: list[dict[str, Any]] = []
    annotations: list[dict[str, Any]] = []
    for index, rows in enumerate(truth):
        images.append({"id": index + 1, "file_name": f"frame_{index}"})
        labelled = rows[:, 2] > 0
        if not labelled.any():
            continue
        xs, ys = rows[labelled, 0], rows[labelled, 1]
        annotations.append(
            {
                "id": len(annotations) + 1,
                "image_id": index + 1,
                "category_id": CATEGORY_ID,
                "keypoints": [float(v) for v in rows.reshape(-1)],
                "num_keypoints": int(labelled.sum()),
                "area": area_px2,
                "iscrowd": 0,
                "bbox": [float(xs.min()), float(ys.min()), float(np.ptp(xs)), float(np.ptp(ys))],
            }
        )
    categories = [
        {
            "id": CATEGORY_ID,
            "name": CATEGORY_NAME,
            "keypoints": list(names),
            "skeleton": [[1, 2]] if len(names) == 2 else [],
        }
    ]
    return {"images": images, "annotations": annotations, "categories": categories}


def coco_results(
    predicted: Sequence[npt.NDArray[np.float64]], scores: Sequence[float]
) -> list[dict[str, Any]]:
    """One detection per frame (``K x 2`` points), scored by the detector's tip score."""
    out = []
    for index, (xy, score) in enumerate(zip(predicted, scores, strict=True)):
        kps = np.concatenate([xy, np.ones((xy.shape[0], 1))], axis=1)
        out.append(
            {
                "image_id": index + 1,
                "category_id": CATEGORY_ID,
                "keypoints": [float(v) for v in kps.reshape(-1)],
                "score": float(score),
            }
        )
    return out


def require_pycocotools() -> None:
    """Raises :class:`MissingExtraError` at once when pycocotools is missing, so a command can
    say so before it spends minutes on the frames."""
    try:
        import pycocotools.coco
        import pycocotools.cocoeval
    except ImportError as exc:
        raise MissingExtraError(
            "OKS AP needs pycocotools; install it with: pip install 'stationcheck[eval]'"
        ) from exc
    del pycocotools


def _cocoeval(gt: dict[str, Any], results: list[dict[str, Any]], names: tuple[str, ...]) -> Any:
    require_pycocotools()
    from pycocotools.coco import COCO
    from pycocotools.cocoeval import COCOeval

    with contextlib.redirect_stdout(io.StringIO()):  # pycocotools prints progress
        coco_gt = COCO()
        coco_gt.dataset = gt
        coco_gt.createIndex()
        coco_dt = coco_gt.loadRes(results) if results else COCO()
        evaluator = COCOeval(coco_gt, coco_dt, iouType="keypoints")
        evaluator.params.kpt_oks_sigmas = sigmas_for(names)
    return evaluator


def oks_ap(
    truth: Sequence[npt.NDArray[np.float64]],
    predicted: Sequence[npt.NDArray[np.float64]],
    scores: Sequence[float],
    names: tuple[str, ...] = ("tip", "rear"),
) -> CocoAp:
    gt = coco_ground_truth(truth, names)
    if not gt["annotations"]:
        return CocoAp(float("nan"), float("nan"), float("nan"))
    evaluator = _cocoeval(gt, coco_results(predicted, scores), names)
    with contextlib.redirect_stdout(io.StringIO()):
        evaluator.evaluate()
        evaluator.accumulate()
        evaluator.summarize()
    stats = evaluator.stats
    return CocoAp(float(stats[0]), float(stats[1]), float(stats[2]))


def reference_oks(
    truth: npt.NDArray[np.float64],
    predicted_xy: npt.NDArray[np.float64],
    names: tuple[str, ...] = ("tip", "rear"),
) -> float:
    """pycocotools' own OKS for one object and one prediction (for cross-checks)."""
    gt = coco_ground_truth([truth], names)
    evaluator = _cocoeval(gt, coco_results([predicted_xy], [1.0]), names)
    with contextlib.redirect_stdout(io.StringIO()):
        evaluator.evaluate()
    ious = evaluator.ious[(1, CATEGORY_ID)]
    return float(np.asarray(ious).reshape(-1)[0])
