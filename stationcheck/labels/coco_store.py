"""The station's labelled frames as a COCO keypoint dataset in the station folder.

Layout: ``<station folder>/labels/coco.json`` and the frames as
``<station folder>/labels/images/<video stem>_<frame index:06d>.png`` (``file_name`` in the
JSON is that bare name, relative to ``images/``, as COCO's own sets name theirs). One category,
``tool`` with keypoints ``tip`` and ``rear``. Each image carries ``video`` (the recording's path
relative to the station folder when it lies inside it, else its file name),
``frame_index``, ``t_s`` and ``tool_visible``; a frame where the tool is not visible is an image
without annotation. Each annotation carries ``label_source`` (``clicked`` or ``propagated``);
an image without one carries it itself (``propagated``: inside a run the engineer marked out
of view).
A rear outside the picture is stored as not labelled (``v`` 0), as COCO does.

Saving merges: labels of the same (video, frame index) replace the stored ones, the rest stay.
The JSON is written to a temporary file and renamed over the old one.
"""

from __future__ import annotations

import json
import logging
import os
from collections.abc import Iterable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import cv2

from stationcheck.errors import InputFileError
from stationcheck.labels.records import KEYPOINT_NAMES, FrameLabel, Point
from stationcheck.labels.video_frames import VideoFrames

log = logging.getLogger(__name__)

LABELS_DIR = "labels"
IMAGES_DIR = "images"
COCO_NAME = "coco.json"
CATEGORY = {"id": 1, "name": "tool", "keypoints": list(KEYPOINT_NAMES), "skeleton": [[1, 2]]}
BOX_MARGIN_PX = 12.0
PNG_LEVEL = 1  # fast to write; the frames are written once


@dataclass(frozen=True)
class SaveResult:
    path: Path
    images: int  # images in the dataset after saving
    annotations: int
    written: int  # image files written by this save


def labels_folder(station_folder: Path) -> Path:
    return station_folder / LABELS_DIR


def image_name(video: Path, frame_index: int) -> str:
    return f"{video.stem}_{frame_index:06d}.png"


def load(folder: Path) -> dict[str, Any]:
    """The dataset in ``folder`` (an empty one when there is none yet)."""
    path = folder / COCO_NAME
    if not path.is_file():
        return {"images": [], "annotations": [], "categories": [CATEGORY]}
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        raise InputFileError(f"cannot read the labels {path}: {exc}") from exc
    if not isinstance(doc, dict) or not isinstance(doc.get("images"), list):
        raise InputFileError(f"{path} is not a COCO dataset (no 'images' list)")
    doc.setdefault("annotations", [])
    return doc


def video_ref(station_folder: Path, video: Path) -> str:
    """How the dataset names a recording: relative to the station folder (so the station's
    config finds it) when it lies inside it, else by file name."""
    try:
        return video.resolve().relative_to(station_folder.resolve()).as_posix()
    except ValueError:
        return video.name


def labels_of(folder: Path, video_name: str) -> list[FrameLabel]:
    """The stored labels of one video (by file name), in frame order."""
    doc = load(folder)
    notes = {a["image_id"]: a for a in doc["annotations"] if isinstance(a, dict)}
    out: list[FrameLabel] = []
    for image in doc["images"]:
        if Path(str(image.get("video"))).name != Path(video_name).name:
            continue
        note = notes.get(image.get("id"))
        if note is None:
            source = image.get("label_source", "clicked")
            out.append(FrameLabel(int(image["frame_index"]), None, None, source))
            continue
        points = note["keypoints"]
        tip = (float(points[0]), float(points[1]))
        rear = (float(points[3]), float(points[4])) if points[5] > 0 else None
        out.append(FrameLabel(int(image["frame_index"]), tip, rear, note["label_source"]))
    return sorted(out, key=lambda label: label.frame_index)


def _inside(point: Point | None, width: int, height: int) -> bool:
    return point is not None and 0 <= point[0] <= width - 1 and 0 <= point[1] <= height - 1


def annotation(label: FrameLabel, width: int, height: int) -> dict[str, Any]:
    """The COCO annotation of a visible label (ids filled in by the caller)."""
    assert label.tip is not None
    rear_in = _inside(label.rear, width, height)
    rear = label.rear if rear_in and label.rear is not None else (0.0, 0.0)
    keypoints = [
        round(label.tip[0], 2), round(label.tip[1], 2), 2,
        round(rear[0], 2), round(rear[1], 2), 2 if rear_in else 0,
    ]  # fmt: skip
    xs = [label.tip[0]] + ([rear[0]] if rear_in else [])
    ys = [label.tip[1]] + ([rear[1]] if rear_in else [])
    x0 = max(0.0, min(xs) - BOX_MARGIN_PX)
    y0 = max(0.0, min(ys) - BOX_MARGIN_PX)
    x1 = min(float(width), max(xs) + BOX_MARGIN_PX)
    y1 = min(float(height), max(ys) + BOX_MARGIN_PX)
    box = [round(x0, 2), round(y0, 2), round(x1 - x0, 2), round(y1 - y0, 2)]
    return {
        "category_id": 1,
        "keypoints": keypoints,
        "num_keypoints": 2 if rear_in else 1,
        "bbox": box,
        "area": round(box[2] * box[3], 2),
        "iscrowd": 0,
        "label_source": label.source,
    }


def save(station_folder: Path, video: VideoFrames, labels: Iterable[FrameLabel]) -> SaveResult:
    """Merge ``labels`` of ``video`` into the station's dataset and write the new frames."""
    folder = labels_folder(station_folder)
    images_dir = folder / IMAGES_DIR
    new = {label.frame_index: label for label in labels}
    named = video_ref(station_folder, video.path)
    doc = load(folder)
    notes = {a["image_id"]: a for a in doc["annotations"] if isinstance(a, dict)}
    kept: list[tuple[dict[str, Any], dict[str, Any] | None]] = [
        (image, notes.get(image.get("id")))
        for image in doc["images"]
        if not (
            Path(str(image.get("video"))).name == video.path.name
            and image.get("frame_index") in new
        )
    ]
    width, height = video.width_px, video.height_px
    for index, label in new.items():
        image = {
            "file_name": image_name(video.path, index),
            "width": width,
            "height": height,
            "video": named,
            "frame_index": index,
            "t_s": round(index / video.fps, 4),
            "tool_visible": label.visible,
        }
        if not label.visible:  # no annotation to say it: the image does
            image["label_source"] = label.source
        kept.append((image, annotation(label, width, height) if label.visible else None))
    kept.sort(key=lambda pair: (str(pair[0].get("video")), int(pair[0].get("frame_index", 0))))
    written = _write_frames(video, images_dir, sorted(new))
    images: list[dict[str, Any]] = []
    annotations: list[dict[str, Any]] = []
    for image_id, (image, note) in enumerate(kept, start=1):
        images.append({**image, "id": image_id})
        if note is not None:
            annotations.append({**note, "id": len(annotations) + 1, "image_id": image_id})
    out = {
        "info": {"description": "stationcheck station labels", "version": "1"},
        "images": images,
        "annotations": annotations,
        "categories": [CATEGORY],
    }
    path = folder / COCO_NAME
    _write_json(path, out)
    log.info("saved %d labelled frames (%d new images) to %s", len(new), written, path)
    return SaveResult(path, len(images), len(annotations), written)


def _write_frames(video: VideoFrames, images_dir: Path, indices: list[int]) -> int:
    missing = [i for i in indices if not (images_dir / image_name(video.path, i)).is_file()]
    if not missing:
        return 0
    try:
        images_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise InputFileError(f"cannot make {images_dir}: {exc}") from exc
    wanted = set(missing)
    written = 0
    for index, image in video.span(missing[0], missing[-1]):
        if index not in wanted:
            continue
        target = images_dir / image_name(video.path, index)
        temporary = target.with_name(f".{target.name}.saving.png")
        if not cv2.imwrite(str(temporary), image, [cv2.IMWRITE_PNG_COMPRESSION, PNG_LEVEL]):
            raise InputFileError(f"cannot write {target}")
        os.replace(temporary, target)
        written += 1
    return written


def _write_json(path: Path, doc: dict[str, Any]) -> None:
    temporary = path.with_name(f".{path.name}.saving")
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
        temporary.write_text(json.dumps(doc, indent=1), encoding="utf-8")
        os.replace(temporary, path)
    except OSError as exc:
        raise InputFileError(f"cannot write {path}: {exc}") from exc
