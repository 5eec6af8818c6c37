"""How far clicks go: simulated labelling of a rendered video against the renderer's truth.

``python -m stationcheck.labels.bench [--video V --truth T.csv --clicks 60]`` clicks the
proposed frames (truth plus 1 px of noise), propagates, clicks what the screen queues (ten at
a time) until the click budget is spent, and prints how many frames got labels and the
propagated tip error against the truth. It prints; it asserts nothing (figures vary with the
video).
"""

from __future__ import annotations

import argparse
import csv
import time
from collections.abc import Iterator
from pathlib import Path

import cv2
import numpy as np
import numpy.typing as npt

from stationcheck.labels.propagation import propagate
from stationcheck.labels.proposal import propose
from stationcheck.labels.records import FrameLabel
from stationcheck.labels.video_frames import VideoFrames

REPO = Path(__file__).resolve().parents[2]
Row = dict[str, str]


def _click(row: Row, rng: np.random.Generator, noise_px: float) -> FrameLabel:
    index = int(row["frame_index"])
    if row["tip_v"] != "2":
        return FrameLabel(index, None, None, "clicked")
    sigma = noise_px / np.sqrt(2.0)
    jitter = rng.normal(0.0, sigma, 4)
    return FrameLabel(
        index,
        (float(row["tip_x_px"]) + jitter[0], float(row["tip_y_px"]) + jitter[1]),
        (float(row["rear_x_px"]) + jitter[2], float(row["rear_y_px"]) + jitter[3]),
        "clicked",
    )


def measure(video_path: Path, truth_path: Path, clicks: int, first: int, seed: int) -> None:
    with truth_path.open() as handle:
        truth = {int(row["frame_index"]): row for row in csv.DictReader(handle)}
    video = VideoFrames(video_path)
    started = time.perf_counter()
    grey: list[npt.NDArray[np.uint8]] = [
        cv2.cvtColor(image, cv2.COLOR_BGR2GRAY)  # type: ignore[misc]
        for _, image in video.span(0, video.frame_count - 1)
    ]
    video.close()
    print(f"{len(grey)} frames decoded in {time.perf_counter() - started:.1f} s")

    def read_span(a: int, b: int) -> Iterator[tuple[int, npt.NDArray[np.uint8]]]:
        for index in range(a, b + 1):
            yield index, grey[index]

    rng = np.random.default_rng(seed)
    proposed = propose(((i, grey[i]) for i in range(0, len(grey), 3)), first)
    clicked = {i: _click(truth[i], rng, 1.0) for i in proposed}
    cache: dict[tuple[FrameLabel, FrameLabel], list[FrameLabel]] = {}
    started = time.perf_counter()
    while True:
        result = propagate(read_span, clicked.values(), cache=cache)
        wanted = [i for i in result.queued() if i not in clicked]
        if len(clicked) >= clicks or not wanted:
            break
        for index in wanted[: min(10, clicks - len(clicked))]:
            clicked[index] = _click(truth[index], rng, 1.0)
    seconds = time.perf_counter() - started
    errors = np.array(
        [
            np.hypot(
                label.tip[0] - float(truth[label.frame_index]["tip_x_px"]),
                label.tip[1] - float(truth[label.frame_index]["tip_y_px"]),
            )
            for label in result.labels
            if label.tip is not None and truth[label.frame_index]["tip_v"] == "2"
        ]
    )
    wrong_visible = sum(truth[label.frame_index]["tip_v"] != "2" for label in result.labels)
    hidden = sum(not label.visible for label in clicked.values())
    print(
        f"{len(clicked)} clicked frames ({hidden} 'not visible') -> {len(result.labels)} "
        f"propagated = {len(clicked) + len(result.labels)} labelled of {len(grey)} frames "
        f"({seconds:.1f} s of propagation in all)"
    )
    if errors.size:
        print(
            f"propagated tip error vs truth: median {np.median(errors):.2f} px, p95 "
            f"{np.percentile(errors, 95):.2f} px, max {errors.max():.2f} px, "
            f"> 5 px: {int((errors > 5).sum())}; labels on frames without the tool: {wrong_visible}"
        )
    print(
        f"left for a click: {len(result.gaps)} runs, {sum(b - a + 1 for a, b in result.gaps)} "
        "frames"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0] if __doc__ else None)
    parser.add_argument("--video", type=Path, default=REPO / "sample_video/demo_station.mp4")
    parser.add_argument("--truth", type=Path, default=REPO / "sample_video/demo_station_truth.csv")
    parser.add_argument("--clicks", type=int, default=60)
    parser.add_argument("--proposals", type=int, default=20)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    measure(args.video, args.truth, args.clicks, args.proposals, args.seed)


if __name__ == "__main__":
    main()
