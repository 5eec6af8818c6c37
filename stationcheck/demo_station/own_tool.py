"""A station recording with a tool the bundled model never saw, labelled as an engineer would:
a few clicked frames, the frames between them carried along by optical flow (demo data).

Used by ``tools/own_tool_demo.py`` (the long demonstration) and its fast test. The clicks are
simulated: the renderer's truth plus 1 px of noise (Gaussian, per axis), or "tool not visible"
where the truth says the tip is out of view.

Propagation here is the demonstration's own stand-in for the setup screen's: pyramidal
Lucas-Kanade (OpenCV ``calcOpticalFlowPyrLK``) from each clicked frame forwards and from the
next one backwards, a point kept only while its forward-backward error stays within
:data:`FB_MAX_PX`; where both reach a frame, the nearer click weighs more. A frame the flow
loses is queued for a click (within the click budget). A "not visible" click marks the frames
around it that differ from it by less than :data:`STILL_LEVELS` grey levels in every 16 px cell
(the empty station) as not visible too.
"""

from __future__ import annotations

import itertools
import json
import logging
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.demo_station.files import REPO_ROOT
from stationcheck.demo_station.held_out_looks import UNSEEN_ARM, UNSEEN_TOOL
from stationcheck.demo_station.rig import OperatorRig
from stationcheck.errors import InputFileError
from stationcheck.pipeline.truth_rows import TruthRow

logger = logging.getLogger(__name__)

RECORDING_SCRIPT = REPO_ROOT / "sample_video" / "look_scenes" / "own_tool_recording.yaml"
CLICK_NOISE_PX = 1.0
FB_MAX_PX = 0.8
LK_WINDOW_PX = 21
LK_LEVELS = 3
BODY_POINTS = 12
REFINE_MAX_PX = 3.0
MAX_BRIDGE_FRAMES = 12  # a fast move between two positions takes ~0.2-0.4 s
STILL_LEVELS = 6.0  # in every 16 px cell
FIRST_SHARE = 0.7  # of the click budget spread evenly over time; the rest where flow is lost
Points = npt.NDArray[np.float64]  # 2 x 3: tip, rear as (x, y, v)


def unseen_rig() -> OperatorRig:
    return OperatorRig(UNSEEN_TOOL, UNSEEN_ARM)


@dataclass(frozen=True)
class FrameLabel:
    frame_index: int
    keypoints: Points  # all zero: tool not visible
    source: str  # "clicked" or "propagated"


def click(row: TruthRow, rng: np.random.Generator) -> Points:
    """What a careful person clicks: the true points plus 1 px noise; all zero when the tip
    is out of view."""
    if row.tip_v == 0:
        return np.zeros((2, 3))
    noise = rng.normal(0.0, CLICK_NOISE_PX, (2, 2))
    rear_v = row.rear_v if row.rear_v else 0
    return np.array(
        [
            [row.tip_x_px + noise[0, 0], row.tip_y_px + noise[0, 1], row.tip_v],
            [row.rear_x_px + noise[1, 0], row.rear_y_px + noise[1, 1], rear_v]
            if rear_v
            else [0.0, 0.0, 0.0],
        ]
    )


def grey_frames(video: Path) -> Iterator[npt.NDArray[np.uint8]]:
    capture = cv2.VideoCapture(str(video))
    if not capture.isOpened():
        raise InputFileError(f"{video}: cannot open video")
    try:
        while True:
            ok, image = capture.read()
            if not ok:
                return
            yield np.asarray(cv2.cvtColor(image, cv2.COLOR_BGR2GRAY), np.uint8)
    finally:
        capture.release()


def _track(
    frames: Sequence[npt.NDArray[np.uint8]], start: Points, backwards: bool
) -> dict[int, Points]:
    """Carries tip and rear of ``frames[0]`` (or ``frames[-1]``) along. The points followed
    lie on the tool's body between them (a tip at the tool's end has the bench in its window,
    and would follow the bench). Each step is tracked from the previous frame, then refined
    against the clicked frame itself (so errors do not add up); the body points' rotation,
    scale and shift from the clicked frame moves tip and rear. Stops where fewer than half of
    the body points pass the forward-backward check."""
    order = list(range(len(frames)))[::-1] if backwards else list(range(len(frames)))
    if not (start[:, 2] > 0).all():
        return {}
    key = order[0]
    tip, rear = start[0, :2], start[1, :2]
    along = np.linspace(0.1, 0.9, BODY_POINTS)[:, None]
    key_points = (tip + along * (rear - tip)).astype(np.float32).reshape(-1, 1, 2)
    key_ends = np.array([tip, rear], np.float64)
    estimate = key_points.copy()
    out: dict[int, Points] = {}
    for a, b in itertools.pairwise(order):
        moved, status = _flow(frames[a], frames[b], estimate)
        back, status_back = _flow(frames[b], frames[a], moved)
        fb = np.linalg.norm((back - estimate).reshape(-1, 2), axis=1)
        good = (status.ravel() == 1) & (status_back.ravel() == 1) & (fb <= FB_MAX_PX)
        if good.sum() < max(3, BODY_POINTS // 2):
            break
        refined, status_ref = _flow(frames[key], frames[b], key_points, guess=moved)
        near = np.linalg.norm((refined - moved).reshape(-1, 2), axis=1) <= REFINE_MAX_PX
        use = good & (status_ref.ravel() == 1) & near
        target = np.where(use[:, None], refined.reshape(-1, 2), moved.reshape(-1, 2))
        matrix, _ = cv2.estimateAffinePartial2D(key_points.reshape(-1, 2)[good], target[good])
        if matrix is None:
            break
        ends = key_ends @ matrix[:, :2].T + matrix[:, 2]
        h, w = frames[b].shape
        inside = (
            (ends[:, 0] >= 0) & (ends[:, 0] <= w - 1) & (ends[:, 1] >= 0) & (ends[:, 1] <= h - 1)
        )
        if not inside[0]:
            break
        kps = np.zeros((2, 3))
        kps[0] = (ends[0, 0], ends[0, 1], 2)
        if inside[1]:
            kps[1] = (ends[1, 0], ends[1, 1], 2)
        out[b] = kps
        estimate = (key_points.reshape(-1, 2) @ matrix[:, :2].T + matrix[:, 2]).astype(np.float32)
        estimate = estimate.reshape(-1, 1, 2)
    return out


def _flow(
    before: npt.NDArray[np.uint8],
    after: npt.NDArray[np.uint8],
    points: npt.NDArray[np.float32],
    guess: npt.NDArray[np.float32] | None = None,
) -> tuple[npt.NDArray[np.float32], npt.NDArray[np.uint8]]:
    """Pyramidal Lucas-Kanade; with ``guess``, one level around it (refinement)."""
    moved, status, _ = cv2.calcOpticalFlowPyrLK(
        before,
        after,
        points,
        guess.copy() if guess is not None else None,  # type: ignore[arg-type]
        winSize=(LK_WINDOW_PX, LK_WINDOW_PX),
        maxLevel=1 if guess is not None else LK_LEVELS,
        criteria=(cv2.TERM_CRITERIA_EPS | cv2.TERM_CRITERIA_COUNT, 30, 0.01),
        flags=cv2.OPTFLOW_USE_INITIAL_FLOW if guess is not None else 0,
    )
    return np.asarray(moved, np.float32), np.asarray(status, np.uint8)


def _still_span(
    frames: Sequence[npt.NDArray[np.uint8]], index: int, limit: tuple[int, int]
) -> range:
    """Frames around ``index`` (within ``limit``) that look like it (tool out of view)."""
    reference = cv2.GaussianBlur(frames[index], (0, 0), 2.0).astype(np.float32)

    def still(i: int) -> bool:
        blurred = cv2.GaussianBlur(frames[i], (0, 0), 2.0).astype(np.float32)
        difference = np.abs(blurred - reference)
        h, w = difference.shape
        cells = cv2.resize(difference, (w // 16, h // 16), interpolation=cv2.INTER_AREA)
        return float(np.max(cells)) < STILL_LEVELS

    low = index
    while low - 1 >= limit[0] and still(low - 1):
        low -= 1
    high = index
    while high + 1 <= limit[1] and still(high + 1):
        high += 1
    return range(low, high + 1)


def propagate(
    frames: Sequence[npt.NDArray[np.uint8]], clicks: dict[int, Points]
) -> tuple[dict[int, FrameLabel], list[int]]:
    """Labels for the frames between clicks, and the frames where the flow was lost (the
    first unlabelled frame of each gap), to be clicked next."""
    labels = {i: FrameLabel(i, kps, "clicked") for i, kps in clicks.items()}
    keys = sorted(clicks)
    lost: list[int] = []
    for i, a in enumerate(keys):
        b = keys[i + 1] if i + 1 < len(keys) else len(frames) - 1
        if clicks[a][0, 2] == 0:
            for j in _still_span(frames, a, (keys[i - 1] if i else 0, b)):
                labels.setdefault(j, FrameLabel(j, np.zeros((2, 3)), "propagated"))
        if b <= a + 1:
            continue
        segment = frames[a : b + 1]
        forward = _track(segment, clicks[a], backwards=False)
        backward = _track(segment, clicks[b], backwards=True) if b in clicks else {}
        for offset in range(1, b - a):
            j = a + offset
            if j in labels:
                continue
            f, k = forward.get(offset), backward.get(offset)
            if f is not None and k is not None:
                wf = (b - j) / (b - a)
                kps = f.copy()
                both = (f[:, 2] > 0) & (k[:, 2] > 0)
                kps[both, :2] = wf * f[both, :2] + (1 - wf) * k[both, :2]
            else:
                kps = f if f is not None else k  # type: ignore[assignment]
            if kps is not None:
                labels[j] = FrameLabel(j, kps, "propagated")
        _bridge(labels, a, b)
        gap = [a + o for o in range(1, b - a) if a + o not in labels]
        if gap:
            lost.append(gap[len(gap) // 2])
    return labels, lost


def _bridge(labels: dict[int, FrameLabel], a: int, b: int) -> None:
    """Fills a short run of frames the flow lost (a fast move blurs the tool) between two
    labelled frames with the tool in view, in a straight line in time."""
    j = a + 1
    while j < b:
        if j in labels:
            j += 1
            continue
        end = j
        while end < b and end not in labels:
            end += 1
        before, after = labels.get(j - 1), labels.get(end)
        if (
            before is not None
            and after is not None
            and end - j <= MAX_BRIDGE_FRAMES
            and (before.keypoints[:, 2] > 0).all()
            and (after.keypoints[:, 2] > 0).all()
        ):
            span = end - (j - 1)
            for k in range(j, end):
                w = (k - (j - 1)) / span
                kps = (1 - w) * before.keypoints + w * after.keypoints
                labels[k] = FrameLabel(k, kps, "propagated")
        j = end + 1


def simulate_labelling(
    video: Path, rows: Sequence[TruthRow], budget: int, seed: int
) -> tuple[dict[int, FrameLabel], int]:
    """Labels of the recording from at most ``budget`` simulated clicks; returns the labels
    and the number of clicks used."""
    frames = list(grey_frames(video))
    if len(frames) != len(rows):
        raise InputFileError(f"{video}: {len(frames)} frames, truth has {len(rows)} rows")
    rng = np.random.default_rng(seed)
    first = max(2, int(budget * FIRST_SHARE))
    picked = {round(x) for x in np.linspace(0, len(frames) - 1, first)}
    clicks = {i: click(rows[i], rng) for i in sorted(picked)}
    while True:
        labels, lost = propagate(frames, clicks)
        room = budget - len(clicks)
        if not lost or room <= 0:
            break
        for index in lost[:room]:
            clicks[index] = click(rows[index], rng)
    logger.info("%d clicks labelled %d of %d frames", len(clicks), len(labels), len(frames))
    return labels, len(clicks)


def write_station_labels(
    station_dir: Path,
    video: Path,
    labels: dict[int, FrameLabel],
    fps: float,
    every: int = 1,
) -> Path:
    """Writes the labels of ``video`` as the station's COCO keypoint dataset (clicked frames
    always, propagated ones every ``every``-th frame) and returns the JSON's path."""
    labels_dir = station_dir / "labels"
    images_dir = labels_dir / "images"
    images_dir.mkdir(parents=True, exist_ok=True)
    keep = {i for i, lab in labels.items() if lab.source == "clicked" or i % every == 0}
    images: list[dict[str, object]] = []
    annotations: list[dict[str, object]] = []
    capture = cv2.VideoCapture(str(video))
    index = 0
    try:
        while keep:
            ok, image = capture.read()
            if not ok:
                break
            if index in keep:
                keep.discard(index)
                label = labels[index]
                name = f"{video.stem}_{index:06d}.png"
                if not cv2.imwrite(str(images_dir / name), image):
                    raise InputFileError(f"cannot write {images_dir / name}")
                image_id = len(images) + 1
                visible = bool(label.keypoints[0, 2] > 0)
                images.append(
                    {
                        "id": image_id,
                        "file_name": f"images/{name}",
                        "width": int(image.shape[1]),
                        "height": int(image.shape[0]),
                        "video": video.relative_to(station_dir).as_posix(),
                        "frame_index": index,
                        "t_s": round(index / fps, 6),
                        "tool_visible": visible,
                    }
                )
                if visible:
                    annotations.append(_annotation(len(annotations) + 1, image_id, label))
            index += 1
    finally:
        capture.release()
    data = {
        "info": {"description": "station labels (DEMO DATA, rendered station)"},
        "images": images,
        "annotations": annotations,
        "categories": [
            {"id": 1, "name": "tool", "keypoints": ["tip", "rear"], "skeleton": [[1, 2]]}
        ],
    }
    path = labels_dir / "coco.json"
    path.write_text(json.dumps(data), encoding="utf-8")
    return path


def _annotation(ann_id: int, image_id: int, label: FrameLabel) -> dict[str, object]:
    kps = label.keypoints
    shown = kps[kps[:, 2] > 0, :2]
    x0, y0 = shown.min(axis=0) - 20
    x1, y1 = shown.max(axis=0) + 20
    return {
        "id": ann_id,
        "image_id": image_id,
        "category_id": 1,
        "keypoints": [round(float(v), 2) for v in kps.reshape(-1)],
        "num_keypoints": int((kps[:, 2] > 0).sum()),
        "bbox": [float(x0), float(y0), float(x1 - x0), float(y1 - y0)],
        "area": float((x1 - x0) * (y1 - y0)),
        "iscrowd": 0,
        "label_source": label.source,
    }
