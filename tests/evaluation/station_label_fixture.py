"""Writes a station label dataset in the setup screen's format, for tests: ``labels/coco.json``
and ``labels/images/<video stem>_<frame:06d>.png`` in a station folder."""

from __future__ import annotations

import json
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import cv2
import numpy as np


@dataclass(frozen=True)
class FixtureFrame:
    video: str  # relative to the station folder
    frame_index: int
    t_s: float
    image: np.ndarray
    keypoints: np.ndarray | None  # 2 x 3; None: marked "tool not visible"
    source: str = "clicked"
    unlabelled: bool = False  # proposed but neither labelled nor marked


def write_labels(station_dir: Path, frames: Sequence[FixtureFrame]) -> Path:
    images_dir = station_dir / "labels" / "images"
    images_dir.mkdir(parents=True, exist_ok=True)
    images, annotations = [], []
    for image_id, item in enumerate(frames, start=1):
        name = f"{Path(item.video).stem}_{item.frame_index:06d}.png"
        assert cv2.imwrite(str(images_dir / name), item.image)
        entry = {
            "id": image_id,
            "file_name": f"images/{name}",
            "width": int(item.image.shape[1]),
            "height": int(item.image.shape[0]),
            "video": item.video,
            "frame_index": item.frame_index,
            "t_s": item.t_s,
        }
        if item.unlabelled:
            images.append(entry)
            continue
        entry["tool_visible"] = item.keypoints is not None
        images.append(entry)
        if item.keypoints is not None:
            kps = np.asarray(item.keypoints, dtype=float)
            annotations.append(
                {
                    "id": len(annotations) + 1,
                    "image_id": image_id,
                    "category_id": 1,
                    "keypoints": [float(v) for v in kps.reshape(-1)],
                    "num_keypoints": int((kps[:, 2] > 0).sum()),
                    "bbox": [0.0, 0.0, float(item.image.shape[1]), float(item.image.shape[0])],
                    "area": 34.0 * 34.0,
                    "iscrowd": 0,
                    "label_source": item.source,
                }
            )
    data = {
        "images": images,
        "annotations": annotations,
        "categories": [{"id": 1, "name": "tool", "keypoints": ["tip", "rear"], "skeleton": [[1, 2]]}],
    }
    path = station_dir / "labels" / "coco.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return path
