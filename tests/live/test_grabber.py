from __future__ import annotations

import time
from collections.abc import Iterator

import numpy as np
import pytest

from stationcheck.core.records import Frame
from stationcheck.errors import InputFileError
from stationcheck.live.grabber import FrameGrabber
from stationcheck.sources.memory_source import MemoryFrameSource
from stationcheck.sources.video_file import VideoFileSource
from tests.plc.conftest import wait_until

SAMPLE = "sample_video/demo_station.mp4"


def images(n: int) -> list[np.ndarray]:
    return [np.full((8, 8, 3), i, dtype=np.uint8) for i in range(n)]


def test_slow_consumer_gets_the_newest_frame_and_drops_are_counted() -> None:
    grabber = FrameGrabber(lambda: MemoryFrameSource(images(50)), retry=False).start()
    try:
        wait_until(lambda: grabber.counts.grabbed == 50, what="all frames read")
        newest = grabber.take(1.0)
        assert newest is not None and newest.frame.index == 49
        assert grabber.take(0.05) is None  # nothing newer
        assert grabber.ended
    finally:
        grabber.stop()
    assert grabber.counts.dropped == 49 and grabber.counts.taken == 1


def test_paced_file_arrives_at_its_frame_rate() -> None:
    fps = 100.0
    grabber = FrameGrabber(lambda: MemoryFrameSource(images(20), fps=fps), pace=True,
                           retry=False).start()
    taken: list[tuple[int, float]] = []
    try:
        while not grabber.ended:
            grabbed = grabber.take(1.0)
            if grabbed is not None:
                taken.append((grabbed.frame.index, grabbed.grabbed_at_s))
    finally:
        grabber.stop()
    span_s = taken[-1][1] - taken[0][1]
    frames = taken[-1][0] - taken[0][0]
    assert frames >= 15
    assert span_s >= frames / fps * 0.95  # never faster than the file's rate


class FlakySource:
    """Fails to open ``fail_opens`` times, then gives ``frames`` and breaks."""

    def __init__(self, state: dict[str, int], frames: int) -> None:
        state["opens"] += 1
        if state["opens"] <= state["fail_opens"]:
            raise InputFileError("camera not found")
        self.name, self.fps, self.frame_count, self.frames = "flaky", 30.0, None, frames

    def __iter__(self) -> Iterator[Frame]:
        for i in range(self.frames):
            yield Frame(index=i, t_s=i / 30.0, image=np.zeros((4, 4, 3), np.uint8))
        raise InputFileError("stream broke")

    def close(self) -> None:
        pass


def test_lost_source_is_retried_with_backoff() -> None:
    state = {"opens": 0, "fail_opens": 2}
    grabber = FrameGrabber(lambda: FlakySource(state, 3), backoff_first_s=0.01,
                           backoff_max_s=0.02).start()
    try:
        # two failed opens, then two streams that each broke after 3 frames
        wait_until(lambda: grabber.counts.failures >= 4, what="two broken streams")
    finally:
        grabber.stop()
    assert grabber.counts.opens >= 2
    assert grabber.counts.grabbed >= 6
    assert grabber.last_error == "stream broke"


@pytest.mark.slow
def test_sample_video_first_frames_through_the_grabber() -> None:
    grabber = FrameGrabber(lambda: VideoFileSource(SAMPLE, max_frames=10), retry=False).start()
    got: list[int] = []
    try:
        deadline = time.monotonic() + 20
        while not grabber.ended and time.monotonic() < deadline:
            grabbed = grabber.take(0.5)
            if grabbed is not None:
                got.append(grabbed.frame.index)
    finally:
        grabber.stop()
    assert got and got == sorted(got) and got[-1] == 9
    assert grabber.counts.grabbed == 10
