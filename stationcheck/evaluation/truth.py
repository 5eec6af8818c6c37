"""Labelled frames for evaluation: a video with its per-frame ground-truth CSV, or a COCO
keypoint dataset (JSON + image directory). Each yields ``(Frame, truth K x 3)`` with rows in
keypoint-name order and COCO visibility (0 absent, 1 labelled but hidden, 2 visible)."""

from __future__ import annotations

import csv
import json
import math
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.core.records import Frame
from stationcheck.errors import InputFileError

TruthRows = npt.NDArray[np.float64]

# Accepted spellings of the ground-truth CSV columns; the first present one is used.
FRAME_COLUMNS = ("frame_index", "frame")
TIME_COLUMNS = ("t_s", "time_s")
POINT_COLUMNS = {
    "x": ("{name}_x_px", "{name}_x"),
    "y": ("{name}_y_px", "{name}_y"),
    "v": ("{name}_v", "{name}_visibility", "{name}_vis"),
}


@dataclass(frozen=True)
class LabelledFrame:
    frame: Frame
    truth: TruthRows


def _column(header: list[str], candidates: tuple[str, ...], what: str, path: Path) -> str:
    for name in candidates:
        if name in header:
            return name
    raise InputFileError(f"{path}: no {what} column (looked for {', '.join(candidates)})")


def read_truth_csv(
    path: Path, names: tuple[str, ...] = ("tip", "rear")
) -> dict[int, tuple[float, TruthRows]]:
    """``{frame index: (t_s, truth rows)}`` from a per-frame ground-truth CSV."""
    try:
        with open(path, newline="") as handle:
            reader = csv.DictReader(handle)
            header = list(reader.fieldnames or [])
            frame_col = _column(header, FRAME_COLUMNS, "frame index", path)
            time_col = _column(header, TIME_COLUMNS, "time", path)
            cols = {
                (name, axis): _column(
                    header, tuple(c.format(name=name) for c in cands), f"{name} {axis}", path
                )
                for name in names
                for axis, cands in POINT_COLUMNS.items()
            }
            out: dict[int, tuple[float, TruthRows]] = {}
            for line, row in enumerate(reader, start=2):
                try:
                    rows = np.array([[_number(row[cols[(n, a)]]) for a in "xyv"] for n in names])
                    out[int(row[frame_col])] = (float(row[time_col]), rows)
                except (ValueError, TypeError) as exc:
                    raise InputFileError(f"{path}:{line}: bad ground-truth row ({exc})") from exc
    except OSError as exc:
        raise InputFileError(f"{path}: cannot read ground truth ({exc})") from exc
    if not out:
        raise InputFileError(f"{path}: the ground truth has no rows")
    return out


def _number(text: str | None) -> float:
    """Empty cells (no position when the tool is out of view) read as NaN -> 0 with v=0."""
    if text is None or text.strip() == "":
        return 0.0
    value = float(text)
    return value if math.isfinite(value) else 0.0


def read_video_frames(
    video: Path, truth_csv: Path, every: int = 1, names: tuple[str, ...] = ("tip", "rear")
) -> Iterator[LabelledFrame]:
    """Every ``every``-th frame of the video with its ground truth."""
    truth = read_truth_csv(truth_csv, names)
    capture = cv2.VideoCapture(str(video))
    if not capture.isOpened():
        raise InputFileError(f"{video}: cannot open video")
    try:
        index = 0
        while True:
            ok, image = capture.read()
            if not ok:
                break
            if index % every == 0:
                if index not in truth:
                    raise InputFileError(f"{truth_csv}: no ground truth for frame {index}")
                t_s, rows = truth[index]
                yield LabelledFrame(Frame(index, t_s, np.asarray(image, np.uint8)), rows)
            index += 1
    finally:
        capture.release()
    if index == 0:
        raise InputFileError(f"{video}: no frame could be decoded")


def read_coco_frames(
    annotations: Path, image_dir: Path, names: tuple[str, ...] = ("tip", "rear")
) -> Iterator[LabelledFrame]:
    """Images of a COCO keypoint dataset in file order; the first annotation of the category
    naming the keypoints is the truth, images without one have the tool absent."""
    try:
        data = json.loads(Path(annotations).read_text())
        category = next(c for c in data["categories"] if set(names) <= set(c.get("keypoints", [])))
        order = [category["keypoints"].index(n) for n in names]
        by_image: dict[int, TruthRows] = {}
        for ann in data.get("annotations", []):
            if ann["category_id"] == category["id"] and ann["image_id"] not in by_image:
                by_image[ann["image_id"]] = np.asarray(ann["keypoints"], float).reshape(-1, 3)[
                    order
                ]
        images = data["images"]
    except StopIteration as exc:
        raise InputFileError(f"{annotations}: no category has the keypoints {list(names)}") from exc
    except (OSError, ValueError, KeyError, TypeError) as exc:
        raise InputFileError(f"{annotations}: not a readable COCO keypoint file ({exc})") from exc
    for index, img in enumerate(images):
        path = Path(image_dir) / img["file_name"]
        image = cv2.imread(str(path), cv2.IMREAD_COLOR)
        if image is None:
            raise InputFileError(f"cannot read image {path}")
        rows = by_image.get(img["id"], np.zeros((len(names), 3)))
        yield LabelledFrame(Frame(index, index / 30.0, np.asarray(image, np.uint8)), rows)
