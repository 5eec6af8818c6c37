"""Score calibration: logistic regression of "keypoint correct" on the heatmap peak logit.

Run after export on held-out frames with the real ONNX detector (coarse and refine as at the
station). A keypoint counts as correct when it is visible (COCO v=2) and the detector's point
is within ``radius_px`` of the label; the fitted ``sigmoid(slope * logit + offset)`` is then
the estimated probability of that, which is what :class:`~stationcheck.vision.detector.
OnnxKeypointDetector` reports as ``score``.
"""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass, field

import numpy as np
import numpy.typing as npt

from stationcheck.vision.model_contract import ScoreCalibration

logger = logging.getLogger(__name__)


def fit_logistic(
    logits: npt.ArrayLike,
    correct: npt.ArrayLike,
    coarse_logits: npt.ArrayLike | None = None,
    l2: float = 1e-3,
    iterations: int = 50,
) -> ScoreCalibration:
    """Maximum-likelihood weights by damped Newton's method (IRLS), lightly regularised.

    With ``coarse_logits`` the coarse model's peak logit is a second feature; its weight is
    dropped if the fit makes it negative. Falls back to the identity when the data cannot
    support a positive slope (one class only, or logits that do not rank correct above wrong).
    """
    x = np.asarray(logits, dtype=np.float64)
    y = np.asarray(correct, dtype=np.float64)
    if x.size == 0 or y.min() == y.max():
        logger.warning("score calibration: one class only (%d samples); identity kept", x.size)
        return ScoreCalibration()
    columns = [x]
    if coarse_logits is not None:
        columns.append(np.asarray(coarse_logits, dtype=np.float64))
    w = _newton(np.stack([*columns, np.ones_like(x)], axis=1), y, l2, iterations)
    if coarse_logits is not None and w[1] < 0:
        w = _newton(np.stack([x, np.ones_like(x)], axis=1), y, l2, iterations)
    slope, offset = float(w[0]), float(w[-1])
    coarse_slope = float(w[1]) if len(w) == 3 else 0.0
    if not all(math.isfinite(v) for v in w) or slope <= 0:
        logger.warning("score calibration: slope %.3g not usable; identity kept", slope)
        return ScoreCalibration()
    return ScoreCalibration(slope, offset, coarse_slope)


def _newton(
    features: npt.NDArray[np.float64], y: npt.NDArray[np.float64], l2: float, iterations: int
) -> npt.NDArray[np.float64]:
    def loss(w: npt.NDArray[np.float64]) -> float:
        z = features @ w
        return float(np.logaddexp(0.0, z).sum() - (y * z).sum() + 0.5 * l2 * (w @ w))

    mean = float(np.clip(y.mean(), 1e-6, 1 - 1e-6))
    w = np.zeros(features.shape[1])
    w[-1] = math.log(mean / (1 - mean))
    current = loss(w)
    for _ in range(iterations):
        z = np.clip(features @ w, -40.0, 40.0)
        p = 1.0 / (1.0 + np.exp(-z))
        grad = features.T @ (p - y) + l2 * w
        hess = (features * (p * (1 - p))[:, None]).T @ features + l2 * np.eye(len(w))
        step = np.linalg.solve(hess, grad)
        scale = 1.0
        while scale > 1e-4 and loss(w - scale * step) > current:  # damped Newton
            scale *= 0.5
        w = w - scale * step
        previous, current = current, loss(w)
        if previous - current < 1e-10 * max(1.0, abs(current)):
            break
    return w


@dataclass
class CalibrationSamples:
    """Peak logits and correctness per keypoint name, collected frame by frame."""

    logits: dict[str, list[float]] = field(default_factory=dict)
    correct: dict[str, list[bool]] = field(default_factory=dict)
    coarse_logits: dict[str, list[float]] = field(default_factory=dict)

    def add(
        self, name: str, logit: float, correct: bool, coarse_logit: float | None = None
    ) -> None:
        self.logits.setdefault(name, []).append(logit)
        self.correct.setdefault(name, []).append(correct)
        if coarse_logit is not None:
            self.coarse_logits.setdefault(name, []).append(coarse_logit)

    def fit(self) -> dict[str, ScoreCalibration]:
        out = {}
        for name, logits in self.logits.items():
            coarse = self.coarse_logits.get(name)
            if coarse is not None and len(coarse) != len(logits):
                raise ValueError(f"calibration samples of {name} mix with and without coarse")
            out[name] = fit_logistic(logits, self.correct[name], coarse)
            logger.info(
                "score calibration %s: %s (%d samples, %.0f%% correct)",
                name,
                out[name],
                len(logits),
                100.0 * float(np.mean(self.correct[name])),
            )
        return out
