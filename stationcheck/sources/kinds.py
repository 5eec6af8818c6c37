"""The kinds of frame source, by name: where ``run``, ``replay`` and the setup screen get frames.

``--source`` / the config's ``camera.source`` is parsed into a camera index (``0``), a stream
URL (``scheme://...``) or a video file path, and the first kind whose ``accepts`` says yes
opens it. Each kind's opener imports OpenCV only when called. Adding a kind: write its
:class:`~stationcheck.sources.frame_source.FrameSource` in this package and add it to
:data:`SOURCE_KINDS` (before a kind that would also accept its spelling); ``docs/recipes.md``,
"Adding a frame source".
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from stationcheck.errors import InputFileError
from stationcheck.sources.frame_source import FrameSource

Where = int | str | Path


@dataclass(frozen=True)
class SourceOptions:
    clock: Callable[[], float] = time.monotonic  # stamps live frames (a file has its own time)
    first_frame: int = 0  # a file: start here
    max_frames: int | None = None  # a file: stop after this many frames


@dataclass(frozen=True)
class SourceKind:
    name: str
    accepts: Callable[[Where], bool]
    open: Callable[[Where, SourceOptions], FrameSource]
    is_file: bool  # frames carry the file's time; can be paced and read to the end


def _open_file(where: Where, options: SourceOptions) -> FrameSource:
    from stationcheck.sources.video_file import VideoFileSource

    if isinstance(where, int):
        raise InputFileError(f"camera {where}: a file source needs a video file path")
    return VideoFileSource(
        Path(where), first_frame=options.first_frame, max_frames=options.max_frames
    )


def _open_capture(where: Where, options: SourceOptions) -> FrameSource:
    from stationcheck.sources.camera import CaptureSource

    if isinstance(where, Path):
        raise InputFileError(f"{where}: a camera or stream source needs an index or a URL")
    return CaptureSource(where, options.clock)


SOURCE_KINDS: dict[str, SourceKind] = {
    kind.name: kind
    for kind in (
        SourceKind("camera", lambda where: isinstance(where, int), _open_capture, is_file=False),
        SourceKind(
            "stream",
            lambda where: isinstance(where, str) and "://" in where,
            _open_capture,
            is_file=False,
        ),
        SourceKind("file", lambda where: isinstance(where, Path), _open_file, is_file=True),
    )
}


def parse_source(text: str) -> Where:
    """``--source`` text: digits are a camera index, ``scheme://...`` a stream, else a file."""
    if text.isdigit():
        return int(text)
    if "://" in text:
        return text
    return Path(text)


def source_kind(where: Where) -> SourceKind:
    for kind in SOURCE_KINDS.values():
        if kind.accepts(where):
            return kind
    raise InputFileError(
        f"not a frame source: {where!r} (a camera index, a stream URL or a video file)"
    )


def open_source(where: Where, options: SourceOptions | None = None) -> FrameSource:
    return source_kind(where).open(where, options or SourceOptions())
