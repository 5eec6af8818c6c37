"""Labelled frames on disk in the COCO keypoint format (the open format a user's own labelled
frames can come in too).

Layout: ``<out>/images/000000.jpg ...`` and ``<out>/annotations.json`` (``file_name`` is relative
to the images directory, as usual for COCO) with one category
``fastening_tool`` (keypoints ``tip``, ``rear``; skeleton [[1, 2]]). A frame without a visible
tool has an image entry and no annotation. ``bbox`` and ``area`` are those of the tool's visible
pixels; keypoint coordinates are pixel indices (top-left pixel centre at (0, 0)).
"""

from __future__ import annotations

import json
import logging
from pathlib import Path
from typing import Any

import cv2
import numpy as np

from stationcheck.demo_station.training import KEYPOINT_NAMES, render_sample
from stationcheck.errors import InputFileError

logger = logging.getLogger(__name__)

CATEGORY_ID = 1
CATEGORY = {
    "id": CATEGORY_ID,
    "name": "fastening_tool",
    "supercategory": "tool",
    "keypoints": list(KEYPOINT_NAMES),
    "skeleton": [[1, 2]],
}
JPEG_QUALITY = 92
ANNOTATIONS_NAME = "annotations.json"


def write_dataset(out_dir: Path, count: int, seed: int, station_fraction: float) -> Path:
    if count < 0:
        raise ValueError(f"count must be >= 0, got {count}")
    if not 0.0 <= station_fraction <= 1.0:
        raise ValueError(f"station_fraction must be in [0, 1], got {station_fraction}")
    images_dir = out_dir / "images"
    try:
        images_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputFileError(f"cannot create {images_dir}: {exc}") from exc
    rng = np.random.default_rng(seed)
    images: list[dict[str, Any]] = []
    annotations: list[dict[str, Any]] = []
    for index in range(count):
        sample = render_sample(rng, station_fraction, want_mask=True)
        name = f"{index:06d}.jpg"
        if not cv2.imwrite(
            str(images_dir / name), sample.image, [cv2.IMWRITE_JPEG_QUALITY, JPEG_QUALITY]
        ):
            raise InputFileError(f"cannot write {images_dir / name}")
        h, w = sample.image.shape[:2]
        images.append({"id": index + 1, "file_name": name, "width": w, "height": h})
        annotation = _annotation(
            index + 1, len(annotations) + 1, sample.keypoints, sample.tool_mask
        )
        if annotation is not None:
            annotations.append(annotation)
        if (index + 1) % 500 == 0:
            logger.info("wrote %d of %d frames", index + 1, count)
    doc = {
        "info": {
            "description": "stationcheck synthetic fastening-tool keypoints (demo data)",
            "version": "1",
        },
        "licenses": [],
        "images": images,
        "annotations": annotations,
        "categories": [CATEGORY],
    }
    path = out_dir / ANNOTATIONS_NAME
    path.write_text(json.dumps(doc, indent=None, separators=(",", ":")), encoding="utf-8")
    return path


def _annotation(
    image_id: int, ann_id: int, keypoints: np.ndarray, mask: np.ndarray | None
) -> dict[str, Any] | None:
    if mask is None or not mask.any():
        return None
    ys, xs = np.nonzero(mask)
    x0, y0 = float(xs.min()), float(ys.min())
    bbox = [x0, y0, float(xs.max()) - x0 + 1.0, float(ys.max()) - y0 + 1.0]
    flat: list[float] = []
    for x, y, v in keypoints.tolist():
        flat += [round(x, 2), round(y, 2), int(v)] if v > 0 else [0, 0, 0]
    return {
        "id": ann_id,
        "image_id": image_id,
        "category_id": CATEGORY_ID,
        "keypoints": flat,
        "num_keypoints": int((keypoints[:, 2] > 0).sum()),
        "bbox": bbox,
        "area": float(mask.sum()),
        "iscrowd": 0,
    }
