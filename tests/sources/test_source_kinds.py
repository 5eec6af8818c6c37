"""The source-kind registry: a ``--source`` spelling picks its kind, and each kind opens frames
that OpenCV itself reads the same way."""

from __future__ import annotations

import itertools
from pathlib import Path

import cv2
import numpy as np
import pytest

from stationcheck.errors import InputFileError
from stationcheck.sources import FrameSource
from stationcheck.sources.camera import CaptureSource
from stationcheck.sources.kinds import (
    SOURCE_KINDS,
    SourceOptions,
    open_source,
    parse_source,
    source_kind,
)
from stationcheck.sources.video_file import VideoFileSource
from tests.pipeline.conftest import write_video


@pytest.mark.parametrize(("text", "kind"), [
    ("0", "camera"), ("2", "camera"), ("rtsp://10.0.0.5/stream1", "stream"),
    ("http://cam.local/video.mjpg", "stream"), ("clips/station.mp4", "file"),
    ("C:/videos/a.avi", "file"),
])
def test_each_spelling_picks_its_kind(text: str, kind: str) -> None:
    assert source_kind(parse_source(text)).name == kind


def test_only_files_are_files() -> None:
    assert {name for name, kind in SOURCE_KINDS.items() if kind.is_file} == {"file"}


def test_a_spelling_no_kind_takes_is_refused() -> None:
    with pytest.raises(InputFileError, match="not a frame source: 'station-cam'"):
        source_kind("station-cam")


def test_a_file_opens_as_a_video_file_with_its_window(tmp_path: Path) -> None:
    path = tmp_path / "clip.mp4"
    write_video(path, 20)
    source = open_source(path, SourceOptions(first_frame=5, max_frames=4))
    try:
        assert isinstance(source, VideoFileSource) and isinstance(source, FrameSource)
        assert [f.index for f in source] == [5, 6, 7, 8]
    finally:
        source.close()


def test_a_stream_url_opens_through_opencv_stamped_by_the_run_clock(tmp_path: Path) -> None:
    path = tmp_path / "clip.avi"
    write_video(path, 6, fourcc="MJPG")
    ticks = itertools.count(100)
    source = open_source(f"file://{path}", SourceOptions(clock=lambda: float(next(ticks))))
    try:
        assert isinstance(source, CaptureSource) and isinstance(source, FrameSource)
        frames = list(itertools.islice(source, 6))
    finally:
        source.close()
    assert [f.t_s for f in frames] == [100.0, 101.0, 102.0, 103.0, 104.0, 105.0]
    capture = cv2.VideoCapture(str(path))  # the same pixels OpenCV decodes from the file
    for frame in frames:
        ok, image = capture.read()
        assert ok and np.array_equal(frame.image, image)
    capture.release()
