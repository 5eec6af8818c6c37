"""Frozen picture by content and by source timestamps; no false alarm on a still station.

The still scenes are the project's own renders (the sample video and the empty demo station
through the same mp4v encoder); the noise model is the renderer's (Gaussian sensor noise,
sigma 1.8 grey levels).
"""

from __future__ import annotations

from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pytest

from stationcheck.core.records import Frame
from stationcheck.demo_station.empty_station import empty_station_frames
from stationcheck.sources.video_file import VideoFileSource
from stationcheck.vision.frozen_image import FrozenImageWatch

SAMPLE_VIDEO = Path(__file__).resolve().parents[2] / "sample_video" / "demo_station.mp4"
STALE_MS = 100.0  # the demo station's stale_frame_ms
FPS = 30.0


def noisy(count: int, seed: int = 0, start: int = 0) -> Iterator[Frame]:
    rng = np.random.default_rng(seed)
    base = rng.integers(60, 200, (120, 160, 3)).astype(np.float32)
    for index in range(start, start + count):
        noise = rng.normal(0.0, 1.8, base.shape)
        image = np.clip(np.round(base + noise), 0, 255).astype(np.uint8)
        yield Frame(index, index / FPS, image)


def test_a_repeated_picture_counts_as_frozen_from_its_last_change() -> None:
    watch = FrozenImageWatch()
    frames = list(noisy(40))
    for frame in frames:
        assert watch.see(frame) == 0.0
    assert watch.noise_floor is not None and watch.noise_floor > 0.1
    last = frames[-1]
    frozen = [watch.see(Frame(last.index + k, (last.index + k) / FPS, last.image))
              for k in range(1, 5)]
    assert frozen == pytest.approx([1000 / FPS * k for k in range(1, 5)])
    assert frozen[2] >= STALE_MS - 1e-6  # the third repeat at 30 frames/s reaches 100 ms
    assert watch.see(next(noisy(1, seed=1, start=45))) == 0.0  # a changed picture ends it


def test_a_source_timestamp_that_stops_advancing_is_a_repeat_whatever_the_picture() -> None:
    watch = FrozenImageWatch()
    frames = list(noisy(40))
    for frame in frames[:35]:
        watch.see(frame, source_t_s=frame.t_s)
    stuck = frames[34].t_s
    ages = [watch.see(frame, source_t_s=stuck) for frame in frames[35:]]
    assert ages[-1] == pytest.approx(5 * 1000 / FPS)


def test_a_noise_free_picture_never_arms_the_check_by_content() -> None:
    watch = FrozenImageWatch()
    image = np.full((240, 320, 3), 90, np.uint8)
    assert all(watch.see(Frame(i, i / FPS, image)) == 0.0 for i in range(100))
    assert watch.noise_floor is None


def test_the_empty_station_for_ten_seconds_is_never_frozen() -> None:
    """Rendered still station, encoded as the sample video is; the one-minute figure is printed
    by ``stationcheck soak --still`` (README)."""
    watch = FrozenImageWatch()
    worst_ms = max(watch.see(frame) for frame in empty_station_frames(10.0))
    assert watch.noise_floor is not None
    assert worst_ms < STALE_MS


@pytest.mark.skipif(not SAMPLE_VIDEO.is_file(), reason="the sample video is not rendered")
def test_the_sample_video_is_never_frozen() -> None:
    watch = FrozenImageWatch()
    worst_ms = max(watch.see(frame) for frame in VideoFileSource(SAMPLE_VIDEO))
    assert worst_ms < STALE_MS
