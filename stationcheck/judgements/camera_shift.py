"""Has the camera moved away from its reference view? Feature matching against the reference.

Method: ORB features (Rublee et al., ICCV 2011) of the reference frame, taken outside every zone
(parts, screws and hands come and go there), are matched with the live frame's by Hamming
distance with Lowe's ratio test (IJCV 2004); a similarity transform (shift, rotation, scale)
is fitted to the matches with RANSAC (Fischler and Bolles 1981) by OpenCV's
``estimateAffinePartial2D``. Matches on the operator's arm or on moved parts disagree with the
camera's motion and fall out as RANSAC outliers. The displacement that matters is the one at
the zones: the largest distance any zone corner moves under the transform.

A similarity rather than a full homography: a camera bumped on a rigid mount mostly shifts and
turns, and four parameters stay well determined even when the arm hides half of the bench.

Light level, colour cast, vignette, noise and compression: each check first looks for the
reference's corner patches by normalised cross-correlation near where they were
(:mod:`stationcheck.judgements.patch_alignment`), which holds in dark, noisy and blocky
pictures where ORB's binary descriptors flip; ORB matching over the whole frame is the second
try, for moves larger than the patches' search. Either estimate counts only with at least
``MIN_INLIERS`` inliers whose median reprojection error is at most ``MAX_RESIDUAL_PX``.

With no estimate, the judge tells a poor picture from a move: when the caller says the picture
is too poor (dark, flat, noisy) or the live frame shows few ORB features, the camera cannot be
checked (``unchecked``; the station inhibits with its own words), which is not a move; a
frame with features that match nothing counts as moved after ``BLIND_S``.
"""

from __future__ import annotations

import logging
from collections.abc import Sequence
from dataclasses import dataclass

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.config.judgement_settings import CameraShiftSettings
from stationcheck.core.observations import CameraMoved
from stationcheck.core.plan import ZoneSpec
from stationcheck.judgements.patch_alignment import PatchAligner
from stationcheck.judgements.zone_window import U8Array

logger = logging.getLogger(__name__)

SCALE = 0.5  # the live check works at half resolution; about 1 px error at the zones
FULL_SCALE = 1.0  # one-off estimates (re-mapping zones) work at full resolution: about 0.3 px
ORB_FEATURES = 400
ORB_LEVELS = 2
FAST_THRESHOLD = 20
RATIO = 0.8
RANSAC_PX = 2.0
MIN_INLIERS = 12
ZONE_MARGIN_PX = 8
CLEAR_RATIO = 0.5  # "back in place" below this share of the tolerance
BLIND_S = 3.0  # no usable estimate for this long counts as moved (fail towards inhibit)
UNCHECKED_S = 0.5  # a picture too poor to check the camera for this long: say so
MIN_PATCH_INLIERS = 8
MAX_RESIDUAL_PX = 1.5  # median reprojection error of the inliers, full-resolution pixels
FEW_FEATURES = 0.35  # live ORB features below this share of the reference's: too few
F64Array = npt.NDArray[np.float64]
Fit = tuple[F64Array, npt.NDArray[np.bool_]]  # transform and inlier mask
Circle = tuple[float, float, float]  # x, y, radius in pixels


@dataclass(frozen=True)
class ShiftEstimate:
    """``matrix`` maps reference-frame pixels to live-frame pixels (2 x 3)."""

    matrix: F64Array
    shift_px: float
    inliers: int
    matches: int
    residual_px: float = 0.0
    method: str = "orb"

    @property
    def rotation_deg(self) -> float:
        return float(np.degrees(np.arctan2(self.matrix[1, 0], self.matrix[0, 0])))

    def shift_at(self, point_px: tuple[float, float]) -> tuple[float, float]:
        """How far a reference-frame point moves (dx, dy), e.g. the image centre."""
        moved = apply_matrix(self.matrix, [point_px])[0]
        return float(moved[0] - point_px[0]), float(moved[1] - point_px[1])


def fit_similarity(
    reference_px: npt.ArrayLike, live_px: npt.ArrayLike, threshold_px: float = RANSAC_PX
) -> Fit | None:
    """RANSAC similarity from matched points (N x 2 each); (matrix, inlier mask) or None."""
    src = np.asarray(reference_px, np.float64).reshape(-1, 2)
    dst = np.asarray(live_px, np.float64).reshape(-1, 2)
    if len(src) < 3 or len(src) != len(dst):
        return None
    matrix, inliers = cv2.estimateAffinePartial2D(
        src,
        dst,
        method=cv2.RANSAC,
        ransacReprojThreshold=threshold_px,
        maxIters=2000,
        confidence=0.995,
        refineIters=10,
    )
    if matrix is None or inliers is None:
        return None
    return np.asarray(matrix, np.float64), inliers.ravel().astype(bool)


def apply_matrix(matrix: F64Array, points_px: npt.ArrayLike) -> F64Array:
    """Points (N x 2) through a 2 x 3 affine or a 3 x 3 homography."""
    points = np.asarray(points_px, np.float64).reshape(-1, 2)
    if matrix.shape == (3, 3):
        mapped = cv2.perspectiveTransform(points.reshape(-1, 1, 2), matrix)
        return np.asarray(mapped, np.float64).reshape(-1, 2)
    return points @ matrix[:, :2].T + matrix[:, 2]


def displacement_px(matrix: F64Array, points_px: npt.ArrayLike) -> float:
    """The largest distance any of the points moves under the transform."""
    points = np.asarray(points_px, np.float64).reshape(-1, 2)
    if len(points) == 0:
        return 0.0
    return float(np.max(np.linalg.norm(apply_matrix(matrix, points) - points, axis=1)))


def remap_zones(zones: Sequence[ZoneSpec], matrix: F64Array) -> list[ZoneSpec]:
    """Zone polygons carried into the live view, rounded to 0.1 px."""
    out = []
    for zone in zones:
        mapped = apply_matrix(matrix, zone.polygon_px)
        polygon = tuple((round(float(x), 1), round(float(y), 1)) for x, y in mapped)
        out.append(ZoneSpec(zone.id, zone.kind, polygon, zone.label))
    return out


class ReferenceView:
    """The reference frame's features and the zone corners whose displacement is judged."""

    def __init__(self, reference: U8Array, zones: Sequence[ZoneSpec], scale: float = SCALE) -> None:
        """``reference``: the reference frame, BGR or grey; ``scale``: the resolution features
        are found at, relative to the frame."""
        self.size_px = (int(reference.shape[1]), int(reference.shape[0]))
        self.scale = scale
        self.corners_px = np.asarray([p for z in zones for p in z.polygon_px], np.float64)
        self._orb = cv2.ORB.create(
            nfeatures=ORB_FEATURES, nlevels=ORB_LEVELS, fastThreshold=FAST_THRESHOLD
        )
        self._matcher = cv2.BFMatcher(cv2.NORM_HAMMING)
        self._static_mask = _outside_zones_mask(self.size_px, zones, scale)
        self.live_features = 0  # ORB features in the last live frame looked at
        self._patches = PatchAligner(self._grey(reference), self._static_mask, scale)
        keypoints, descriptors = self._features(reference, self._static_mask)
        self._points_px = np.asarray([k.pt for k in keypoints], np.float64) / scale
        self._descriptors = descriptors
        if len(keypoints) < MIN_INLIERS:
            logger.warning(
                "the reference frame has only %d usable features outside the zones; "
                "camera moves may go unnoticed",
                len(keypoints),
            )

    @property
    def feature_count(self) -> int:
        return len(self._points_px)

    def estimate(
        self, image: U8Array, ignore_circles_px: Sequence[Circle] = ()
    ) -> ShiftEstimate | None:
        """Reference -> live transform for a frame (BGR or grey), or None when too few features
        agree. ``ignore_circles_px`` ((x, y, radius) in live pixels, e.g. around the tool) are
        left out."""
        if (image.shape[1], image.shape[0]) != self.size_px:
            return None
        src, dst = self._patches.match(self._grey(image), ignore_circles_px)
        estimate = self._fit(src, dst, MIN_PATCH_INLIERS, "patches")
        if estimate is not None:
            return estimate
        return self._estimate_orb(image, ignore_circles_px)

    @property
    def too_few_features(self) -> bool:
        """The last live frame (tried with ORB) showed too few features to check the camera."""
        return self.live_features < FEW_FEATURES * max(MIN_INLIERS, self.feature_count)

    def _fit(
        self, src: F64Array, dst: F64Array, min_inliers: int, method: str
    ) -> ShiftEstimate | None:
        fitted = fit_similarity(src, dst)
        if fitted is None or int(fitted[1].sum()) < min_inliers:
            return None
        matrix, inliers = fitted
        errors = np.linalg.norm(apply_matrix(matrix, src[inliers]) - dst[inliers], axis=1)
        residual = float(np.median(errors))
        if residual > MAX_RESIDUAL_PX:
            return None
        return ShiftEstimate(
            matrix,
            displacement_px(matrix, self.corners_px),
            int(inliers.sum()),
            len(src),
            residual,
            method,
        )

    def _estimate_orb(
        self, image: U8Array, ignore_circles_px: Sequence[Circle]
    ) -> ShiftEstimate | None:
        self.live_features = 0
        if self._descriptors is None:
            return None
        mask = self._static_mask
        if ignore_circles_px:
            mask = mask.copy()
            for x, y, radius in ignore_circles_px:
                cv2.circle(
                    mask,
                    (round(x * self.scale), round(y * self.scale)),
                    max(1, round(radius * self.scale)),
                    0,
                    -1,
                )
        keypoints, descriptors = self._features(image, mask)
        self.live_features = len(keypoints)
        if descriptors is None or len(keypoints) < 2:
            return None
        pairs = self._matcher.knnMatch(self._descriptors, descriptors, k=2)
        good = [
            pair[0]
            for pair in pairs
            if len(pair) == 2 and pair[0].distance < RATIO * pair[1].distance
        ]
        if len(good) < MIN_INLIERS:
            return None
        src = self._points_px[[m.queryIdx for m in good]]
        dst = np.asarray([keypoints[m.trainIdx].pt for m in good], np.float64) / self.scale
        return self._fit(src, dst, MIN_INLIERS, "orb")

    def _grey(self, image: U8Array) -> U8Array:
        grey = cv2.cvtColor(image, cv2.COLOR_BGR2GRAY) if image.ndim == 3 else image
        size = (self._static_mask.shape[1], self._static_mask.shape[0])
        if size == (grey.shape[1], grey.shape[0]):
            return np.asarray(grey, np.uint8)
        return np.asarray(cv2.resize(grey, size, interpolation=cv2.INTER_AREA), np.uint8)

    def _features(
        self, image: U8Array, mask: U8Array
    ) -> tuple[Sequence[cv2.KeyPoint], U8Array | None]:
        small = self._grey(image)
        keypoints, descriptors = self._orb.detectAndCompute(small, mask)
        return keypoints, None if descriptors is None else np.asarray(descriptors, np.uint8)


def _outside_zones_mask(
    size_px: tuple[int, int], zones: Sequence[ZoneSpec], scale: float
) -> U8Array:
    width, height = round(size_px[0] * scale), round(size_px[1] * scale)
    mask = np.full((height, width), 255, np.uint8)
    for zone in zones:
        points = np.round(np.asarray(zone.polygon_px, np.float64) * scale * 16).astype(np.int32)
        cv2.fillPoly(mask, [points], 0, shift=4)
    grow = max(1, round(ZONE_MARGIN_PX * scale))
    kernel = cv2.getStructuringElement(cv2.MORPH_ELLIPSE, (2 * grow + 1, 2 * grow + 1))
    return np.asarray(cv2.erode(mask, kernel), np.uint8)


class CameraShiftJudge:
    """Checks every ``interval_ms`` and changes state after ``confirm_checks`` agreeing checks.

    While a check disagrees with the current state (``suspect``), the next check runs on the
    next frame, so a real move is confirmed within a few frames.
    """

    def __init__(self, view: ReferenceView, settings: CameraShiftSettings) -> None:
        self.view = view
        self.settings = settings
        self.moved = False
        self.last: ShiftEstimate | None = None
        self._last_check_t_s: float | None = None
        self._streak = 0  # checks in a row that disagree with the state
        self._blind_since_t_s: float | None = None
        self.unchecked = False  # the picture is too poor to check the camera

    @property
    def suspect(self) -> bool:
        return self._streak > 0

    def due(self, t_s: float) -> bool:
        last = self._last_check_t_s
        return (
            last is None or self.suspect or t_s - last >= self.settings.interval_ms / 1000.0 - 1e-9
        )

    def checked_at(self, t_s: float) -> bool:
        return self._last_check_t_s == t_s

    def check(
        self,
        t_s: float,
        image: U8Array,
        ignore_circles_px: Sequence[Circle] = (),
        picture_poor: bool = False,
    ) -> CameraMoved | None:
        """Estimate now on a frame (BGR or grey); the observation when the state changes.
        ``picture_poor``: the picture is known to be too dark, flat or noisy to trust."""
        self._last_check_t_s = t_s
        estimate = self.view.estimate(image, ignore_circles_px)
        if estimate is None:
            return self._blind(t_s, picture_poor)
        self._blind_since_t_s = None
        self.unchecked = False
        self.last = estimate
        tolerance = self.settings.tolerance_px
        disagrees = (
            estimate.shift_px < CLEAR_RATIO * tolerance
            if self.moved
            else estimate.shift_px > tolerance
        )
        self._streak = self._streak + 1 if disagrees else 0
        if self._streak < self.settings.confirm_checks:
            return None
        self._streak = 0
        return self._switch(t_s, not self.moved, estimate.shift_px)

    def _blind(self, t_s: float, picture_poor: bool) -> CameraMoved | None:
        if self._blind_since_t_s is None:
            self._blind_since_t_s = t_s
        blind_s = t_s - self._blind_since_t_s
        if picture_poor or self.view.too_few_features:
            if blind_s >= UNCHECKED_S - 1e-9 and not self.unchecked:
                self.unchecked = True
                logger.warning("the picture is too poor to check the camera's position")
            if self.unchecked:
                self._blind_since_t_s = t_s  # a poor picture is not a move
            return None
        self.unchecked = False
        if self.moved or blind_s < BLIND_S:
            return None
        logger.warning(
            "no usable camera-shift estimate for %.1f s; counting the camera as moved",
            t_s - self._blind_since_t_s,
        )
        shift = self.last.shift_px if self.last is not None else 0.0
        return self._switch(t_s, True, shift)

    def _switch(self, t_s: float, moved: bool, shift_px: float) -> CameraMoved:
        self.moved = moved
        logger.info(
            "camera %s at %.3f s (shift %.1f px at the zones)",
            "moved" if moved else "back in place",
            t_s,
            shift_px,
        )
        return CameraMoved(t_s=t_s, moved=moved, shift_px=round(max(0.0, shift_px), 2))
