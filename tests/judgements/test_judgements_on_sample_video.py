"""The judgements on the sample video against its per-frame ground truth sidecar.

Tolerances (frames at 30 fps; a lag is judged frame minus truth frame):
* bins: every reach found, none invented; onset within -3..+3, end within 0..+10 (the arm
  leaves the bin after the fingers' front point the truth follows);
* locking pin: never 'present' on an absent pin and never 'absent' on an engaged one; every
  stretch of at least 8 frames where the pin is in view is named within 5 frames of its start
  (17 when it starts with the 12-frame cross-fade to a new unit, which the truth counts as
  absent from its first frame);
* camera: the nudge is judged within 8 frames of the first frame whose true zone shift
  exceeds the tolerance (checks run every 200 ms plus one confirming check), never before.
"""

from __future__ import annotations

from collections.abc import Iterator

import cv2
import numpy as np
import pytest

from stationcheck.benches.truth_comparison import (
    TruthComparison,
    compare_trace,
    read_truth_columns,
)
from stationcheck.config.schema import StationConfig
from stationcheck.core.records import Frame
from stationcheck.judgements.judgement_trace import JudgementTrace, run_judgements, video_frames
from stationcheck.judgements.station import StationJudgements
from stationcheck.judgements.teaching import read_manifest, teaching_dir
from tests.judgements.conftest import REPO_ROOT

VIDEO = REPO_ROOT / "sample_video" / "demo_station.mp4"
TRUTH = REPO_ROOT / "sample_video" / "demo_station_truth.csv"
FADE_FRAMES = 12

pytestmark = [
    pytest.mark.slow,
    pytest.mark.skipif(not VIDEO.is_file() or not TRUTH.is_file(),
                       reason="sample video not rendered (tools/render_sample_video)"),
]


class CropKeeper:
    """Passes frames through, keeping the locking pin's crop of each."""

    def __init__(self, frames: Iterator[Frame], box: tuple[int, int, int, int]) -> None:
        self.frames, self.box, self.crops = frames, box, []

    def __iter__(self) -> Iterator[Frame]:
        x0, y0, x1, y1 = self.box
        for frame in self.frames:
            self.crops.append(cv2.cvtColor(frame.image[y0:y1, x0:x1], cv2.COLOR_BGR2GRAY))
            yield frame


@pytest.fixture(scope="module")
def run(demo_config: StationConfig) -> tuple[JudgementTrace, TruthComparison, dict, CropKeeper]:
    manifest = read_manifest(teaching_dir(demo_config, "locking_pin"))
    assert manifest is not None, "the demo's locking pin is not taught"
    keeper = CropKeeper(video_frames(VIDEO), manifest.crop_box_px)
    trace = run_judgements(StationJudgements.from_config(demo_config), iter(keeper))
    columns = read_truth_columns(TRUTH)
    result = compare_trace(trace, columns, demo_config.zone_specs(),
                           demo_config.judgements.camera_shift.tolerance_px,
                           {"locking_pin": ("pin_engaged", "pin_zone_clear")})
    return trace, result, columns, keeper


def test_the_whole_video_was_judged(run: tuple) -> None:
    trace, _, columns, _ = run
    assert trace.frames == len(columns["frame_index"])


def test_every_reach_into_a_bin_is_found_and_nothing_else(run: tuple) -> None:
    _, result, _, _ = run
    reaches = 0
    for comparison in result.bins:
        assert comparison.extra == (), comparison.zone
        for match in comparison.matches:
            assert match.found is not None, (comparison.zone, match.truth)
            assert -3 <= match.onset_lag <= 3, (comparison.zone, match)
            assert 0 <= match.offset_lag <= 10, (comparison.zone, match)
            reaches += 1
    assert reaches == 15  # 7 gasket picks, 7 cover picks, 1 reach into the wrong bin


def test_the_locking_pin_is_never_judged_wrong(run: tuple) -> None:
    _, result, _, _ = run
    check = result.checks["locking_pin"]
    assert check.wrong_present == 0
    assert check.wrong_absent == 0


def test_every_view_of_the_pin_is_named_in_time(run: tuple) -> None:
    _, result, columns, _ = run
    engaged = columns["pin_engaged"] > 0
    changes = set((np.flatnonzero(np.diff(engaged.astype(int))) + 1).tolist())
    long_runs = 0
    for state, (start, end), lag in result.checks["locking_pin"].visible_runs:
        if end - start < 8:
            continue
        long_runs += 1
        allowed = 5 + (FADE_FRAMES if start in changes and not state else 0)
        assert lag is not None and lag <= allowed, (state, start, end, lag)
    assert long_runs >= 20


def test_the_camera_nudge_is_judged_and_nothing_before_it(run: tuple) -> None:
    trace, result, _, _ = run
    camera = result.camera
    assert camera.first_true_frame is not None
    assert camera.false_frames == 0
    assert camera.lag is not None and 0 <= camera.lag <= 8
    assert all(trace.moved[camera.first_judged_frame:])  # it stays moved to the end
    moves = [obs for obs in trace.observations if obs.kind == "camera_moved"]
    assert len(moves) == 1 and moves[0].shift_px > 10.0


def test_the_taught_pin_images_are_not_frames_of_the_sample_video(
    run: tuple, demo_config: StationConfig
) -> None:
    """The check is taught from rendered frames only, so the video stays a fair test."""
    _, _, _, keeper = run
    folder = teaching_dir(demo_config, "locking_pin")
    manifest = read_manifest(folder)
    assert manifest is not None
    video = np.stack(keeper.crops).astype(np.float32)
    for image in manifest.images:
        taught = cv2.imread(str(folder / image.file), cv2.IMREAD_GRAYSCALE).astype(np.float32)
        closest = float(np.min(np.mean(np.abs(video - taught), axis=(1, 2))))
        assert closest > 1.0, image.file
        assert image.source.startswith("demo data: rendered frame")
