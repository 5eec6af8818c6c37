"""A station's own labelled frames (``<station folder>/labels/``) and their split by time.

The setup screen's Label tab writes a COCO keypoint dataset: ``labels/coco.json`` and
``labels/images/<video stem>_<frame:06d>.png``. One category (``tool``, keypoints ``tip`` and
``rear``); each image also carries ``video`` (the recording, relative to the station folder),
``frame_index`` and ``t_s``; a frame where the tool is not in view is an image without an
annotation and ``"tool_visible": false``; annotations say whether a person clicked the points
or propagation carried them (``label_source``).

Neighbouring frames of one video look alike, so a random split would test a model on near
copies of what it was trained on. The split here is by time, per video: the last
:data:`HELD_OUT_SHARE` of each video's labelled span is held out for the fitness report, the
:data:`CALIBRATION_SHARE` before it calibrates the scores, and only the frames before that
(less a :data:`GAP_S` margin on each boundary) are trained on.
"""

from __future__ import annotations

import json
import logging
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
import numpy.typing as npt

from stationcheck.errors import InputFileError
from stationcheck.labels.coco_store import COCO_NAME, IMAGES_DIR, labels_folder
from stationcheck.labels.records import KEYPOINT_NAMES

logger = logging.getLogger(__name__)

HELD_OUT_SHARE = 0.2
CALIBRATION_SHARE = 0.1
GAP_S = 1.0  # frames this close to a boundary are left out of training (near copies)


@dataclass(frozen=True)
class StationLabel:
    """One labelled frame: the image file, where it came from, and its ``2 x 3`` keypoints
    (x_px, y_px, COCO visibility; all zero when the tool is not in view)."""

    image: Path
    video: str
    frame_index: int
    t_s: float
    keypoints: npt.NDArray[np.float64]
    label_source: str  # "clicked", "propagated" or "" (tool not in view)

    @property
    def tool_visible(self) -> bool:
        return bool(self.keypoints[0, 2] > 0)


@dataclass(frozen=True)
class TimeSplit:
    """Disjoint parts of a station's labels, each in (video, time) order."""

    train: tuple[StationLabel, ...]
    calibration: tuple[StationLabel, ...]
    held_out: tuple[StationLabel, ...]

    def held_out_spans(self) -> dict[str, tuple[float, float]]:
        """Per video, the first and last held-out time (s)."""
        spans: dict[str, tuple[float, float]] = {}
        for item in self.held_out:
            low, high = spans.get(item.video, (item.t_s, item.t_s))
            spans[item.video] = (min(low, item.t_s), max(high, item.t_s))
        return spans


def read_station_labels(station_dir: Path) -> list[StationLabel]:
    """Every labelled frame of the station, in (video, time) order.

    Raises:
        InputFileError: no labels yet, or the file is not such a dataset (one line).
    """
    path = labels_folder(station_dir) / COCO_NAME
    if not path.is_file():
        raise InputFileError(
            f"{path}: the station has no labelled frames yet (label a recording in the setup "
            "screen's Label tab first)"
        )
    try:
        data = json.loads(path.read_text(encoding="utf-8"))
        return _labels(data, path)
    except (OSError, ValueError, KeyError, TypeError, IndexError) as exc:
        raise InputFileError(f"{path}: not a readable station label file ({exc})") from exc


def _labels(data: dict[str, Any], path: Path) -> list[StationLabel]:
    category = next(
        (c for c in data["categories"] if set(KEYPOINT_NAMES) <= set(c.get("keypoints", []))),
        None,
    )
    if category is None:
        raise InputFileError(f"{path}: no category has the keypoints {list(KEYPOINT_NAMES)}")
    order = [category["keypoints"].index(n) for n in KEYPOINT_NAMES]
    by_image: dict[int, tuple[npt.NDArray[np.float64], str]] = {}
    for ann in data.get("annotations", []):
        if ann["category_id"] != category["id"] or ann["image_id"] in by_image:
            continue
        raw = np.asarray(ann["keypoints"], dtype=np.float64).reshape(-1, 3)[order]
        by_image[ann["image_id"]] = (raw, str(ann.get("label_source", "clicked")))
    folder = path.parent
    out = []
    for img in data["images"]:
        kps, source = by_image.get(img["id"], (np.zeros((len(order), 3)), ""))
        if img["id"] not in by_image and img.get("tool_visible", True) is not False:
            continue  # neither labelled nor marked "not visible": not a label yet
        out.append(
            StationLabel(
                image=_image_path(folder, str(img["file_name"])),
                video=str(img.get("video", "")),
                frame_index=int(img.get("frame_index", 0)),
                t_s=float(img.get("t_s", 0.0)),
                keypoints=kps,
                label_source=source,
            )
        )
    if not out:
        raise InputFileError(f"{path}: the dataset has no labelled frames")
    out.sort(key=lambda item: (item.video, item.t_s, item.frame_index))
    return out


def _image_path(folder: Path, file_name: str) -> Path:
    """``file_name`` as COCO names it, relative to ``images/`` (the Label tab writes that);
    relative to the labels folder itself when the file is there (older sets)."""
    beside = folder / file_name
    if beside.is_file() and not (folder / IMAGES_DIR / file_name).is_file():
        return beside
    return folder / IMAGES_DIR / file_name


def split_by_time(
    labels: Iterable[StationLabel],
    held_out_share: float = HELD_OUT_SHARE,
    calibration_share: float = CALIBRATION_SHARE,
    gap_s: float = GAP_S,
) -> TimeSplit:
    """Per video: the last ``held_out_share`` of its labelled time span held out, the
    ``calibration_share`` before it for calibration, the rest (less ``gap_s`` before each
    boundary) for training."""
    by_video: dict[str, list[StationLabel]] = {}
    for item in labels:
        by_video.setdefault(item.video, []).append(item)
    train: list[StationLabel] = []
    calibration: list[StationLabel] = []
    held: list[StationLabel] = []
    for video in sorted(by_video):
        items = sorted(by_video[video], key=lambda i: (i.t_s, i.frame_index))
        first, last = items[0].t_s, items[-1].t_s
        span = last - first
        held_from = first + (1.0 - held_out_share) * span
        calibration_from = held_from - calibration_share * span
        for item in items:
            if item.t_s >= held_from:
                held.append(item)
            elif item.t_s >= calibration_from:
                if item.t_s < held_from - gap_s:
                    calibration.append(item)
            elif item.t_s < calibration_from - gap_s:
                train.append(item)
    split = TimeSplit(tuple(train), tuple(calibration), tuple(held))
    if not split.train or not split.held_out:
        raise InputFileError(
            f"too few labelled frames to hold any out: {len(split.train)} to train on, "
            f"{len(split.held_out)} held out (label frames spread over the whole recording)"
        )
    logger.info(
        "labels split by time: %d to train, %d to calibrate, %d held out",
        len(split.train),
        len(split.calibration),
        len(split.held_out),
    )
    return split


def truth_rows(labels: Sequence[StationLabel]) -> list[npt.NDArray[np.float64]]:
    return [item.keypoints for item in labels]
