"""The Label tab's API: frames of a recorded video, proposals, the model's guess, propagation,
saving into the station's COCO dataset, and the fine-tune child.

The labels themselves live on the page until saved; the server keeps only what is costly to
make again (open videos, proposals, propagated spans). The station folder is the config's
folder; the config must be saved before labels can be stored beside it.
"""

from __future__ import annotations

import logging
import threading
from collections.abc import Callable
from pathlib import Path
from typing import Any

import cv2

from stationcheck.errors import InputFileError, ModelError, StationcheckError
from stationcheck.labels import coco_store
from stationcheck.labels.propagation import SpanCache, propagate
from stationcheck.labels.proposal import propose
from stationcheck.labels.records import FrameLabel
from stationcheck.labels.train_child import TrainingChild, train_command
from stationcheck.labels.video_frames import VideoFrames
from stationcheck.web.server import Request, Response, Router, WebError
from stationcheck.web.setup import dry_run
from stationcheck.web.setup.workspace import SetupSession

log = logging.getLogger(__name__)

PROPOSAL_STEP_FRAMES = 3
DEFAULT_PROPOSALS = 20
MAX_PROPOSALS = 200
MAX_LABELS = 100_000
LABEL_BODY_BYTES = 16 * 1024 * 1024
JPEG_QUALITY = 92

TrainCommand = Callable[[Path], list[str]]


class LabelService:
    """``train`` makes the fine-tune's command line from the saved config's path (tests give
    a stand-in; the product runs ``stationcheck train --station CONFIG --progress-json``)."""

    def __init__(self, session: SetupSession, train: TrainCommand = train_command) -> None:
        self.session = session
        self.train_command = train
        self._lock = threading.Lock()
        self._videos: dict[Path, VideoFrames] = {}
        self._spans: dict[Path, SpanCache] = {}
        self._proposals: dict[tuple[Path, int], list[int]] = {}
        self._detectors: dict[str, Any] = {}
        self._training: TrainingChild | None = None

    def add_routes(self, router: Router) -> None:
        routes: dict[tuple[str, str], Callable[[Request], Response]] = {
            ("GET", "/api/label/open"): self.open,
            ("GET", "/api/label/frame"): self.frame,
            ("POST", "/api/label/guess"): self.guess,
            ("POST", "/api/label/propagate"): self.propagate,
            ("POST", "/api/label/save"): self.save,
            ("POST", "/api/label/train"): self.train,
            ("GET", "/api/label/train"): self.training_state,
            ("POST", "/api/label/train/cancel"): self.cancel_training,
        }
        for (method, path), handler in routes.items():
            router.add(
                method, path, handler, max_body_bytes=None if method == "GET" else LABEL_BODY_BYTES
            )

    def _video(self, path_text: str) -> VideoFrames:
        path = self.session.existing_file(path_text, "video file")
        with self._lock:
            video = self._videos.get(path)
            if video is None:
                video = self._videos[path] = VideoFrames(path)
            return video

    def _station_folder(self) -> Path:
        if self.session.config_path is None:
            raise WebError(409, "save the config first: labels are stored beside it")
        return self.session.config_path.parent

    def open(self, request: Request) -> Response:
        named = request.query.get("video", "")
        video = self._video(named)
        count = request.int_arg("count", DEFAULT_PROPOSALS, 1, MAX_PROPOSALS)
        key = (video.path, count)
        if key not in self._proposals:
            every = (
                (i, image)
                for i, image in video.span(0, max(0, video.frame_count - 1))
                if i % PROPOSAL_STEP_FRAMES == 0
            )
            self._proposals[key] = propose(every, count)
        stored: list[FrameLabel] = []
        folder = None
        if self.session.config_path is not None:
            labels_dir = coco_store.labels_folder(self._station_folder())
            stored = coco_store.labels_of(labels_dir, video.path.name)
            folder = self.session.workspace.shown(labels_dir)
        return Response.json(
            {
                "video": named,  # as the page names paths: from the config's folder
                "fps": video.fps,
                "frames": video.frame_count,
                "width_px": video.width_px,
                "height_px": video.height_px,
                "proposals": self._proposals[key],
                "stored": [label.to_json() for label in stored],
                "folder": folder,
            }
        )

    def frame(self, request: Request) -> Response:
        video = self._video(request.query.get("video", ""))
        index = request.int_arg("i", 0, 0, 1 << 24)
        ok, encoded = cv2.imencode(
            ".jpg", video.frame(index), [cv2.IMWRITE_JPEG_QUALITY, JPEG_QUALITY]
        )
        if not ok:
            raise InputFileError(f"cannot encode frame {index}")
        return Response(200, encoded.tobytes(), "image/jpeg", {"Cache-Control": "max-age=600"})

    def guess(self, request: Request) -> Response:
        """The current model's tip and rear in one frame (the station's model when the config
        is usable and names one, else the bundled model)."""
        from stationcheck.core.records import Frame

        body = _body(request)
        video = self._video(str(body.get("video") or ""))
        index = _whole(body.get("i"), "i")
        detector, model = self._detector(body.get("data"))
        image = video.frame(index)
        keypoints = detector.detect(Frame(index=index, t_s=index / video.fps, image=image))
        tip, rear = keypoints.get("tip"), keypoints.get("rear")
        return Response.json(
            {
                "model": model,
                "tip": None if tip is None else [round(tip.x_px, 1), round(tip.y_px, 1)],
                "rear": None if rear is None else [round(rear.x_px, 1), round(rear.y_px, 1)],
                "score": 0.0 if tip is None else round(tip.score, 3),
            }
        )

    def _detector(self, data: Any) -> tuple[Any, str]:
        from stationcheck.vision.detector import load_detector

        path: Path | None = None
        if isinstance(data, dict):
            try:
                path = dry_run.usable_config(data, self.session.base_dir).model_path
            except WebError:
                path = None  # a config with errors: the bundled model still guesses
        key = str(path) if path is not None else "bundled"
        with self._lock:
            if key not in self._detectors:
                try:
                    self._detectors[key] = load_detector(path, threads=1)
                except (ModelError, StationcheckError) as exc:
                    raise WebError(400, f"cannot load the model {key}: {exc}") from exc
            shown = self.session.workspace.shown(path) if path is not None else "bundled model"
            return self._detectors[key], shown

    def propagate(self, request: Request) -> Response:
        body = _body(request)
        video = self._video(str(body.get("video") or ""))
        clicked = _labels(body.get("clicked"))
        marks = _runs(body.get("out_of_view", []))
        cache = self._spans.setdefault(video.path, {})
        result = propagate(video.span, clicked, cache=cache, out_of_view=marks)
        return Response.json(
            {
                "labels": [label.to_json() for label in result.labels],
                "queued": list(result.queued()),
                "gaps": [list(gap) for gap in result.gaps],
                "hidden_runs": [run.to_json() for run in result.hidden_runs],
                "smear": result.smear.to_json(),
            }
        )

    def save(self, request: Request) -> Response:
        body = _body(request)
        video = self._video(str(body.get("video") or ""))
        labels = _labels(body.get("labels"))
        if any(label.frame_index >= video.frame_count for label in labels):
            raise WebError(400, f"a label names a frame past the video's end ({video.frame_count})")
        result = coco_store.save(self._station_folder(), video, labels)
        return Response.json(
            {
                "path": self.session.workspace.shown(result.path),
                "images": result.images,
                "annotations": result.annotations,
                "written": result.written,
            }
        )

    def train(self, request: Request) -> Response:
        folder = self._station_folder()
        config = self.session.config_path
        if config is None or not config.is_file():
            raise WebError(409, "save the config first: the training reads it")
        with self._lock:
            if self._training is not None and self._training.running:
                raise WebError(409, "a training is already running")
            if not (coco_store.labels_folder(folder) / coco_store.COCO_NAME).is_file():
                raise WebError(409, "no labels saved yet: label and save frames first")
            self._training = TrainingChild(self.train_command(config), folder)
        return Response.json(self._training.state())

    def training_state(self, request: Request) -> Response:
        training = self._training
        if training is None:
            return Response.json({"running": False, "progress": {}, "result": None})
        return Response.json(training.state())

    def cancel_training(self, request: Request) -> Response:
        training = self._training
        if training is not None:
            training.cancel()
        return self.training_state(request)


def _body(request: Request) -> dict[str, Any]:
    body = request.json()
    if not isinstance(body, dict):
        raise WebError(400, "the request body must be a JSON object")
    return body


def _whole(value: Any, name: str) -> int:
    if not isinstance(value, int) or isinstance(value, bool) or value < 0:
        raise WebError(400, f"{name} must be a frame index (0, 1, ...)")
    return value


def _labels(value: Any) -> list[FrameLabel]:
    if not isinstance(value, list) or len(value) > MAX_LABELS:
        raise WebError(400, f"send the labels as a list (at most {MAX_LABELS})")
    try:
        return [FrameLabel.from_json(item) for item in value]
    except (ValueError, TypeError) as exc:
        raise WebError(400, f"bad label: {exc}") from exc


def _runs(value: Any) -> list[tuple[int, int]]:
    """The engineer's out-of-view marks: a list of [first, last] frame indices."""
    if not isinstance(value, list) or len(value) > MAX_LABELS:
        raise WebError(400, f"send out_of_view as a list of [first, last] (at most {MAX_LABELS})")
    runs: list[tuple[int, int]] = []
    for item in value:
        if not isinstance(item, list) or len(item) != 2:
            raise WebError(400, f"an out_of_view run is [first, last], got {item!r}")
        first, last = _whole(item[0], "out_of_view first"), _whole(item[1], "out_of_view last")
        if first > last:
            raise WebError(400, f"an out_of_view run ends before it starts: [{first}, {last}]")
        runs.append((first, last))
    return runs
