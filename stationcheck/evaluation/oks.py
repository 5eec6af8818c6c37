"""Object keypoint similarity (OKS) as defined by the COCO keypoint evaluation.

``OKS = mean over labelled keypoints of exp(-d^2 / (2 * area * kappa^2))`` with
``kappa = 2 * sigma`` (COCO's ``vars = (sigmas * 2) ** 2``). The COCO person sigmas do not
apply to a tool, so stationcheck fixes its own, tied to what matters at a station:

- ``area`` is the same for every tool instance: the area of a square fastener zone of the demo
  station, ``34 px * 34 px = 1156 px^2`` at 640x480. The tool's own size says nothing about how
  precisely its tip must sit on a screw, so the scale is the zone, not the object.
- ``sigma_tip = 0.0625`` puts OKS 0.5 at a 5 px tip error (the p95 target) and OKS 0.95 at
  ~1.4 px; ``sigma_rear = 0.125`` doubles the tolerance for the rear, which only gives the
  tool's direction.
"""

from __future__ import annotations

import numpy as np
import numpy.typing as npt

OKS_AREA_PX2 = 34.0 * 34.0
OKS_SIGMAS = {"tip": 0.0625, "rear": 0.125}


def sigmas_for(names: tuple[str, ...]) -> npt.NDArray[np.float64]:
    return np.array([OKS_SIGMAS[name] for name in names], dtype=np.float64)


def object_keypoint_similarity(
    truth: npt.ArrayLike,
    predicted_xy: npt.ArrayLike,
    sigmas: npt.ArrayLike,
    area_px2: float = OKS_AREA_PX2,
) -> float | None:
    """OKS of one prediction (``K x 2``) against one truth (``K x 3``, COCO v); ``None`` when
    the truth has no labelled keypoint (COCO ignores such an object)."""
    t = np.asarray(truth, dtype=np.float64).reshape(-1, 3)
    p = np.asarray(predicted_xy, dtype=np.float64).reshape(-1, 2)
    labelled = t[:, 2] > 0
    if not labelled.any():
        return None
    kappa_sq = (2.0 * np.asarray(sigmas, dtype=np.float64)) ** 2
    d_sq = ((p - t[:, :2]) ** 2).sum(axis=1)
    e = d_sq / kappa_sq / (area_px2 + np.spacing(1)) / 2.0
    return float(np.exp(-e[labelled]).mean())
