"""Frames for the setup screen: the reference frame and teaching samples, from a video file at
a chosen time, a camera index, or a stream URL."""

from __future__ import annotations

import logging
import math
from dataclasses import dataclass
from pathlib import Path
from typing import Any
from urllib.parse import unquote, urlsplit

import cv2

from stationcheck.errors import InputFileError
from stationcheck.judgements import frame_grab
from stationcheck.judgements.frame_grab import Grabbed
from stationcheck.web.server import WebError
from stationcheck.web.setup.workspace import SetupSession

log = logging.getLogger(__name__)

STREAM_WARMUP_FRAMES = 5
MAX_SAMPLES = 20
IMAGE_SUFFIXES = (".png", ".jpg", ".jpeg")
STREAM_SCHEMES = ("rtsp", "rtsps", "http", "https")


@dataclass(frozen=True)
class FrameRequest:
    """Where to take frames: ``kind`` video (``video`` path, ``at_s``), camera (``camera``
    index) or stream (``url``); ``count`` frames ``every_s`` apart."""

    kind: str
    video: Path | None = None
    at_s: float = 0.0
    camera: int = 0
    url: str = ""
    count: int = 1
    every_s: float = 1.0

    @classmethod
    def from_json(cls, body: dict[str, Any], session: SetupSession) -> FrameRequest:
        kind = body.get("source")
        count = _number(body.get("count", 1), "count")
        every_s = _number(body.get("every_s", 1.0), "every_s")
        if not 1 <= count <= MAX_SAMPLES or count != int(count):
            raise WebError(400, f"count must be a whole number from 1 to {MAX_SAMPLES}")
        if kind == "video":
            video = session.existing_file(str(body.get("video") or ""), "video file")
            return cls(
                "video",
                video=video,
                at_s=_number(body.get("at_s", 0.0), "at_s"),
                count=int(count),
                every_s=every_s,
            )
        if kind == "camera":
            index = body.get("camera", 0)
            if not isinstance(index, int) or isinstance(index, bool) or not 0 <= index < 64:
                raise WebError(400, "camera must be a camera index (0, 1, ...)")
            return cls("camera", camera=index, count=int(count), every_s=every_s)
        if kind == "stream":
            url = str(body.get("url") or "")
            scheme = url.split("://", 1)[0].lower() if "://" in url else ""
            if scheme == "file":  # a file named as a URL is a file: inside the setup folder
                video = session.existing_file(unquote(urlsplit(url).path), "video file")
                return cls("video", video=video, at_s=0.0, count=int(count), every_s=every_s)
            if scheme not in STREAM_SCHEMES or any(c in url for c in "\x00\r\n|"):
                raise WebError(
                    400,
                    "a stream is a camera URL starting with "
                    f"{', '.join(s + '://' for s in STREAM_SCHEMES)}",
                )
            return cls("stream", url=url, count=int(count), every_s=every_s)
        raise WebError(400, "source must be 'video', 'camera' or 'stream'")


def grab(request: FrameRequest, size_px: tuple[int, int]) -> list[Grabbed]:
    """The requested frames (BGR) with where each came from.

    Raises:
        InputFileError: the source cannot be opened or has no frame at the wanted time.
    """
    if request.kind == "video":
        assert request.video is not None
        if not request.video.is_file():
            raise InputFileError(f"no such video file: tried {request.video}")
        return frame_grab.frames_from_video(
            request.video, request.at_s, request.count, request.every_s
        )
    if request.kind == "camera":
        return [
            frame_grab.frame_from_camera(request.camera, *size_px) for _ in range(request.count)
        ]
    return _from_stream(request.url, request.count, request.every_s)


def _from_stream(url: str, count: int, every_s: float) -> list[Grabbed]:
    from stationcheck.sources.camera import CaptureSource

    source = CaptureSource(url)
    try:
        out: list[Grabbed] = []
        next_t_s: float | None = None
        for number, frame in enumerate(source):
            if number < STREAM_WARMUP_FRAMES:
                continue
            if next_t_s is None or frame.t_s >= next_t_s:
                out.append((frame.image, f"{url} at {frame.t_s:.2f} s"))
                next_t_s = frame.t_s + every_s
            if len(out) == count:
                return out
        raise InputFileError(f"{url}: no frames")
    finally:
        source.close()


def video_info(path: Path) -> dict[str, Any]:
    """Length and rate of a video file, for choosing a time in it."""
    if not path.is_file():
        raise InputFileError(f"no such video file: tried {path}")
    capture = cv2.VideoCapture(str(path))
    try:
        if not capture.isOpened():
            raise InputFileError(f"{path.name}: cannot open the video")
        fps = float(capture.get(cv2.CAP_PROP_FPS) or 0.0)
        frames = int(capture.get(cv2.CAP_PROP_FRAME_COUNT) or 0)
        width = int(capture.get(cv2.CAP_PROP_FRAME_WIDTH))
        height = int(capture.get(cv2.CAP_PROP_FRAME_HEIGHT))
    finally:
        capture.release()
    duration_s = frames / fps if fps > 0 and math.isfinite(fps) else 0.0
    return {
        "fps": fps,
        "frames": frames,
        "duration_s": round(duration_s, 2),
        "width_px": width,
        "height_px": height,
    }


def write_reference(image: Any, target: Path) -> None:
    if target.suffix.lower() not in IMAGE_SUFFIXES:
        raise WebError(400, "the reference frame is saved as .png (or .jpg)")
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
        ok = cv2.imwrite(str(target), image)
    except (OSError, cv2.error) as exc:
        raise InputFileError(f"cannot write {target}: {exc}") from exc
    if not ok:
        raise InputFileError(f"cannot write {target}")
    log.info("reference frame written to %s", target)


def _number(value: Any, name: str) -> float:
    if isinstance(value, bool) or not isinstance(value, int | float) or not math.isfinite(value):
        raise WebError(400, f"{name} must be a number")
    if value < 0:
        raise WebError(400, f"{name} must not be negative")
    return float(value)
