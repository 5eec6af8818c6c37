"""Labelled frames in, training batches for both stages out.

A *frame source* yields ``(image_bgr, keypoints K x 3)`` for a random generator: the demo
renderer's training frames, or a COCO keypoint dataset (a user's own labelled frames). A source
that also knows the empty view behind a frame (a station's recording) offers
``sample_with_background``, so the motion-blur augmentation can smear the tool alone. Each
source frame is augmented and turned into a coarse example (whole frame, all keypoints) and a
refine example (a crop around a jittered tip, or a negative crop elsewhere, tip only), built
with the runtime's own preprocessing so training and station see the same pixels.
"""

from __future__ import annotations

import json
import logging
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Protocol, runtime_checkable

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.errors import InputFileError
from stationcheck.training.augment import AugmentSettings, NoiseBank, augment_frame
from stationcheck.training.targets import gaussian_heatmaps
from stationcheck.vision.model_contract import ModelInfo
from stationcheck.vision.preprocessing import Preprocessor

logger = logging.getLogger(__name__)

ImageU8 = npt.NDArray[np.uint8]
FloatArray = npt.NDArray[np.float64]
SampleFn = Callable[[np.random.Generator], tuple[ImageU8, FloatArray]]
# a frame with the same view without the tool (None when unknown)
BackgroundSampleFn = Callable[[np.random.Generator], tuple[ImageU8, FloatArray, ImageU8 | None]]
# a frame of a fast move: (image, keypoints, the tip's step (dx, dy) px since the previous frame)
MovingSampleFn = Callable[
    [np.random.Generator], tuple[ImageU8, npt.NDArray[np.floating], tuple[float, float]]
]


class FrameSource(Protocol):
    def sample(self, rng: np.random.Generator) -> tuple[ImageU8, FloatArray]: ...


@runtime_checkable
class BackgroundFrameSource(Protocol):
    def sample_with_background(
        self, rng: np.random.Generator
    ) -> tuple[ImageU8, FloatArray, ImageU8 | None]: ...


class FunctionSource:
    """Wraps one or more ``sample(rng) -> (image, keypoints)`` functions, mixed by weight;
    ``background_functions`` also give the empty view behind their frame."""

    def __init__(
        self,
        functions: Sequence[tuple[SampleFn, float]],
        background_functions: Sequence[tuple[BackgroundSampleFn, float]] = (),
    ) -> None:
        if not functions and not background_functions:
            raise ValueError("FunctionSource needs at least one sample function")
        self._functions: list[BackgroundSampleFn] = [
            *(_without_background(f) for f, _ in functions),
            *(f for f, _ in background_functions),
        ]
        weights = np.array(
            [w for _, w in functions] + [w for _, w in background_functions], dtype=np.float64
        )
        self._p = weights / weights.sum()

    def sample(self, rng: np.random.Generator) -> tuple[ImageU8, FloatArray]:
        image, kps, _ = self.sample_with_background(rng)
        return image, kps

    def sample_with_background(
        self, rng: np.random.Generator
    ) -> tuple[ImageU8, FloatArray, ImageU8 | None]:
        index = int(rng.choice(len(self._functions), p=self._p))
        image, kps, background = self._functions[index](rng)
        return image, np.asarray(kps, dtype=np.float64).reshape(-1, 3), background


def _without_background(function: SampleFn) -> BackgroundSampleFn:
    def sample(rng: np.random.Generator) -> tuple[ImageU8, FloatArray, ImageU8 | None]:
        image, kps = function(rng)
        return image, kps, None

    return sample


class CocoSource:
    """Frames of a COCO keypoint dataset; one annotation (the first of the category) per image,
    images without one are tool-absent frames."""

    def __init__(
        self, annotations: Path, image_dir: Path, keypoint_names: tuple[str, ...] = ("tip", "rear")
    ) -> None:
        try:
            data = json.loads(Path(annotations).read_text())
            categories = data["categories"]
            images = data["images"]
            anns = data.get("annotations", [])
        except (OSError, ValueError, KeyError, TypeError) as exc:
            raise InputFileError(
                f"{annotations}: not a readable COCO keypoint file ({exc})"
            ) from exc
        category = next(
            (c for c in categories if set(keypoint_names) <= set(c.get("keypoints", []))), None
        )
        if category is None:
            raise InputFileError(
                f"{annotations}: no category has the keypoints {list(keypoint_names)}"
            )
        order = [category["keypoints"].index(n) for n in keypoint_names]
        by_image: dict[int, FloatArray] = {}
        for ann in anns:
            if ann.get("category_id") != category["id"] or ann["image_id"] in by_image:
                continue
            raw = np.asarray(ann["keypoints"], dtype=np.float64).reshape(-1, 3)
            by_image[ann["image_id"]] = raw[order]
        self._items = [
            (Path(image_dir) / img["file_name"], by_image.get(img["id"], np.zeros((len(order), 3))))
            for img in images
        ]
        if not self._items:
            raise InputFileError(f"{annotations}: the dataset has no images")
        logger.info(
            "COCO source %s: %d images, %d labelled", annotations, len(self._items), len(by_image)
        )

    def __len__(self) -> int:
        return len(self._items)

    def split(self, holdout_fraction: float, seed: int) -> tuple[CocoSource, CocoSource]:
        """Two disjoint sources (training, held out) by a seeded shuffle of the images."""
        order = np.random.default_rng([seed, 0x5917]).permutation(len(self._items))
        n_hold = max(1, round(holdout_fraction * len(order)))
        if n_hold >= len(order):
            raise InputFileError("the dataset is too small to hold frames out for calibration")
        parts = []
        for indices in (order[n_hold:], order[:n_hold]):
            part = object.__new__(CocoSource)
            part._items = [self._items[i] for i in indices]
            parts.append(part)
        return parts[0], parts[1]

    def sample(self, rng: np.random.Generator) -> tuple[ImageU8, FloatArray]:
        path, kps = self._items[int(rng.integers(len(self._items)))]
        image = cv2.imread(str(path), cv2.IMREAD_COLOR)
        if image is None:
            raise InputFileError(f"cannot read image {path}")
        return np.asarray(image, np.uint8), kps.copy()


@dataclass(frozen=True)
class ExampleSettings:
    sigma_cells: float = 1.25
    p_refine_negative: float = 0.2
    refine_jitter_px: float = 7.0
    refine_far_jitter_px: float = 34.0
    p_refine_far: float = 0.2
    p_refine_border: float = 0.6  # tool in view, tip outside: crop where it leaves the frame
    reuse: int = 4  # augmented copies per source frame
    augment: AugmentSettings = field(default_factory=AugmentSettings)


@dataclass
class Batch:
    coarse_x: npt.NDArray[np.float32]
    coarse_y: npt.NDArray[np.float32]
    refine_x: npt.NDArray[np.float32]
    refine_y: npt.NDArray[np.float32]


class BatchMaker:
    """Builds batches reproducibly: batch ``n`` of seed ``s`` depends only on (s, n)."""

    def __init__(
        self,
        source: FrameSource,
        coarse: ModelInfo,
        refine: ModelInfo,
        batch_size: int,
        seed: int,
        settings: ExampleSettings = ExampleSettings(),
    ) -> None:
        self.source = source
        self.coarse = coarse
        self.refine = refine
        self.batch_size = batch_size
        self.seed = seed
        self.settings = settings
        self._coarse_pre = Preprocessor(coarse)
        self._refine_pre = Preprocessor(refine)
        self._noise = NoiseBank(np.random.default_rng([seed, 0xB0]))
        self._tip_index = coarse.keypoint_names.index(refine.keypoint_names[0])

    def batch(self, index: int) -> Batch:
        rng = np.random.default_rng([self.seed, index])
        cx, cy, rx, ry = [], [], [], []
        frame: tuple[ImageU8, FloatArray, ImageU8 | None] | None = None
        for i in range(self.batch_size):
            if frame is None or i % self.settings.reuse == 0:
                if isinstance(self.source, BackgroundFrameSource):
                    frame = self.source.sample_with_background(rng)
                else:
                    frame = (*self.source.sample(rng), None)
            image, kps = augment_frame(
                rng, frame[0], frame[1], self._noise, self.settings.augment, background=frame[2]
            )
            x, y = self._coarse_example(image, kps)
            cx.append(x)
            cy.append(y)
            x, y = self._refine_example(rng, image, kps)
            rx.append(x)
            ry.append(y)
        return Batch(np.stack(cx), np.stack(cy), np.stack(rx), np.stack(ry))

    def _coarse_example(
        self, image: ImageU8, kps: FloatArray
    ) -> tuple[npt.NDArray[np.float32], npt.NDArray[np.float32]]:
        blob, window = self._coarse_pre.whole_frame(image)
        pts = np.array([window.to_input(x, y) for x, y in kps[:, :2]])
        info = self.coarse
        target = gaussian_heatmaps(
            pts,
            kps[:, 2] > 0,
            info.heatmap_height,
            info.heatmap_width,
            info.output_stride,
            self.settings.sigma_cells,
        )
        return blob[0], target

    def _refine_example(
        self, rng: np.random.Generator, image: ImageU8, kps: FloatArray
    ) -> tuple[npt.NDArray[np.float32], npt.NDArray[np.float32]]:
        s = self.settings
        h, w = image.shape[:2]
        tip = kps[self._tip_index]
        if tip[2] > 0 and rng.random() >= s.p_refine_negative:
            spread = s.refine_far_jitter_px if rng.random() < s.p_refine_far else s.refine_jitter_px
            centre = tip[:2] + np.clip(rng.normal(0.0, spread, 2), -2.2 * spread, 2.2 * spread)
        elif tip[2] == 0 and kps[:, 2].any() and rng.random() < s.p_refine_border:
            centre = _border_point_near(rng, kps[np.flatnonzero(kps[:, 2] > 0)[0], :2], w, h)
        elif kps[:, 2].sum() > 0 and rng.random() < 0.5:
            other = kps[rng.choice(np.flatnonzero(kps[:, 2] > 0))]
            centre = other[:2] + rng.normal(0.0, 10.0, 2)
        else:
            centre = np.array([rng.uniform(0, w - 1), rng.uniform(0, h - 1)])
        blob, window = self._refine_pre.crop(image, float(centre[0]), float(centre[1]))
        info = self.refine
        pts = np.array([window.to_input(tip[0], tip[1])])
        target = gaussian_heatmaps(
            pts,
            np.array([tip[2] > 0]),
            info.heatmap_height,
            info.heatmap_width,
            info.output_stride,
            s.sigma_cells,
        )
        return blob[0], target


def _border_point_near(rng: np.random.Generator, point: FloatArray, w: int, h: int) -> FloatArray:
    """A point just inside the frame border nearest ``point``, jittered along the border: where
    a tool whose tip is out of view crosses the frame edge."""
    x, y = float(point[0]), float(point[1])
    distances = (x, w - 1 - x, y, h - 1 - y)
    side = int(np.argmin(distances))
    along = rng.normal(0.0, 40.0)
    inward = rng.uniform(0.0, 24.0)
    if side == 0:
        return np.array([inward, y + along])
    if side == 1:
        return np.array([w - 1 - inward, y + along])
    if side == 2:
        return np.array([x + along, inward])
    return np.array([x + along, h - 1 - inward])
