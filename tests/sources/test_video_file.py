"""The video-file frame source against files written by OpenCV's own VideoWriter."""

from __future__ import annotations

import os
from pathlib import Path

import cv2
import numpy as np
import pytest

from stationcheck.errors import InputFileError
from stationcheck.sources import FrameSource, MemoryFrameSource
from stationcheck.sources.video_file import VideoFileSource
from tests.pipeline.conftest import write_video


def test_frames_come_in_order_with_the_files_clock(tmp_path: Path) -> None:
    path = tmp_path / "clip.mp4"
    written = write_video(path, 45, fps=25.0)
    with VideoFileSource(path) as source:
        assert isinstance(source, FrameSource)
        frames = list(source)
    assert source.fps == 25.0 and source.frame_count == 45
    assert [f.index for f in frames] == list(range(45))
    assert [f.t_s for f in frames] == [i / 25.0 for i in range(45)]
    # the same pixels OpenCV itself decodes (mp4v is lossy: compare with a direct read)
    capture = cv2.VideoCapture(str(path))
    for frame in frames:
        ok, image = capture.read()
        assert ok and np.array_equal(frame.image, image)
    capture.release()
    assert abs(int(frames[10].image.mean()) - int(written[10].mean())) <= 3


def test_a_window_of_frames(tmp_path: Path) -> None:
    path = tmp_path / "clip.mp4"
    write_video(path, 30)
    with VideoFileSource(path, first_frame=10, max_frames=5) as source:
        frames = list(source)
    assert source.frame_count == 5
    assert [f.index for f in frames] == [10, 11, 12, 13, 14]
    assert frames[0].t_s == pytest.approx(10 / 30)


def _damaged_in_the_middle(path: Path) -> None:
    data = bytearray(path.read_bytes())
    for k in range(len(data) // 4, len(data) // 2, 7):
        data[k] ^= 0xFF
    path.write_bytes(bytes(data))


@pytest.mark.parametrize(
    ("make", "message"),
    [
        (lambda p: None, "video file not found"),
        (lambda p: p.write_bytes(b""), "not a video file OpenCV can open"),
        (lambda p: p.write_bytes(os.urandom(4000)), "not a video file OpenCV can open"),
        (lambda p: p.write_text("hello"), "not a video file OpenCV can open"),
        (lambda p: (write_video(p, 60), p.write_bytes(p.read_bytes()[:1500])),
         "not a video file OpenCV can open"),
        (lambda p: (write_video(p, 60), _damaged_in_the_middle(p)),
         "is damaged: decoding stopped at frame"),
        (lambda p: p.mkdir(), "not a file"),
    ],
)
def test_unreadable_videos_give_one_clear_line(
    tmp_path: Path, capfd: pytest.CaptureFixture[str], make: object, message: str
) -> None:
    path = tmp_path / "clip.mp4"
    make(path)  # type: ignore[operator]
    capfd.readouterr()
    with pytest.raises(InputFileError) as info, VideoFileSource(path) as source:
        list(source)
    assert message in str(info.value)
    assert "\n" not in str(info.value)
    assert capfd.readouterr().err == ""  # no FFmpeg or OpenCV chatter on the console


def test_frames_before_a_mid_file_failure_are_given_out(tmp_path: Path) -> None:
    path = tmp_path / "clip.mp4"
    write_video(path, 60)
    _damaged_in_the_middle(path)
    got = []
    with pytest.raises(InputFileError), VideoFileSource(path) as source:
        for frame in source:
            got.append(frame.index)
    assert 0 < len(got) < 60
    assert got == list(range(len(got)))


def test_the_memory_source_can_fail_on_purpose() -> None:
    images = [np.zeros((4, 4, 3), np.uint8)] * 5
    source = MemoryFrameSource(images, 10.0, fail_at=3, error=InputFileError("gone"))
    got = []
    with pytest.raises(InputFileError, match="gone"):
        for frame in source:
            got.append((frame.index, frame.t_s))
    assert got == [(0, 0.0), (1, 0.1), (2, 0.2)]
