"""How far clicks go: simulated labelling of a rendered video against the renderer's truth.

``python -m stationcheck.benches.label_reach [--video V --truth T.csv --clicks 60]`` labels the
video as an engineer would on the Label tab (:func:`~stationcheck.demo_station.own_tool.\
simulate_labelling`: the proposed frames clicked as the truth plus 1 px of noise, propagation,
the strips beside "not visible" clicks marked, the queue clicked ten at a time until the click
budget is spent) and prints how many frames got labels, how many of them say "not visible",
and the propagated tip error against the truth. It prints; it asserts nothing (figures vary
with the video).
"""

from __future__ import annotations

import argparse
import time
from pathlib import Path

import numpy as np

from stationcheck.demo_station.files import REPO_ROOT
from stationcheck.demo_station.own_tool import simulate_labelling
from stationcheck.pipeline.truth_rows import read_truth_csv


def measure(video: Path, truth: Path, clicks: int, proposals: int, seed: int) -> None:
    rows = read_truth_csv(truth)
    started = time.perf_counter()
    labels, clicked, marks = simulate_labelling(video, rows, clicks, seed, proposals)
    seconds = time.perf_counter() - started
    errors = np.array(
        [
            np.hypot(
                label.tip[0] - rows[label.frame_index].tip_x_px,
                label.tip[1] - rows[label.frame_index].tip_y_px,
            )
            for label in labels
            if label.source == "propagated"
            and label.tip is not None
            and rows[label.frame_index].tip_v == 2
        ]
    )
    hidden = [label for label in labels if label.tip is None]
    wrong_hidden = sum(rows[label.frame_index].tip_v != 0 for label in hidden)
    wrong_visible = sum(
        rows[label.frame_index].tip_v == 0 for label in labels if label.tip is not None
    )
    print(
        f"{clicked} clicked frames and {marks} out-of-view marks -> {len(labels)} labelled of "
        f"{len(rows)} frames, {len(hidden)} of them 'not visible' ({seconds:.1f} s in all)"
    )
    if errors.size:
        print(
            f"propagated tip error vs truth: median {np.median(errors):.2f} px, p95 "
            f"{np.percentile(errors, 95):.2f} px, max {errors.max():.2f} px, "
            f"> 5 px: {int((errors > 5).sum())}"
        )
    print(
        f"labels on frames without the tip: {wrong_visible}; 'not visible' on frames with it: "
        f"{wrong_hidden}"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0] if __doc__ else None)
    parser.add_argument("--video", type=Path, default=REPO_ROOT / "sample_video/demo_station.mp4")
    parser.add_argument(
        "--truth", type=Path, default=REPO_ROOT / "sample_video/demo_station_truth.csv"
    )
    parser.add_argument("--clicks", type=int, default=60)
    parser.add_argument("--proposals", type=int, default=20)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    measure(args.video, args.truth, args.clicks, args.proposals, args.seed)


if __name__ == "__main__":
    main()
