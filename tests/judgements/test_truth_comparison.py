"""The comparison with ground truth: interval matching and the true camera shift."""

from __future__ import annotations

import numpy as np
import pytest

from stationcheck.benches.truth_comparison import (
    compare_bins,
    compare_camera,
    compare_check,
    runs,
    true_zone_shift_px,
)
from stationcheck.core.plan import ZoneSpec
from stationcheck.demo_station.camera import CameraTransform
from tests.judgements.conftest import true_shift_px


@pytest.mark.parametrize(("flags", "expected"), [
    ([], []), ([0, 0], []), ([1, 1, 0, 1], [(0, 2), (3, 4)]), ([0, 1, 1, 1], [(1, 4)])])
def test_runs_are_half_open_intervals(flags: list[int], expected: list[tuple[int, int]]) -> None:
    assert runs(np.asarray(flags, bool)) == expected


def test_bins_match_each_reach_and_report_lags_and_inventions() -> None:
    truth = np.zeros(40, bool)
    truth[5:10] = truth[20:25] = True
    found = np.zeros(40, bool)
    found[7:13] = found[30:33] = True
    result = compare_bins(found, truth, "bin_a")
    assert [(m.truth, m.found, m.onset_lag, m.offset_lag) for m in result.matches] == [
        ((5, 10), (7, 13), 2, 3), ((20, 25), None, None, None)]
    assert result.missed == 1
    assert result.extra == ((30, 33),)


def test_check_counts_wrong_verdicts_and_lags_per_visible_stretch() -> None:
    present = np.array([1, 1, 1, 1, 0, 0, 0, 0], bool)
    clear = np.array([1, 1, 1, 1, 1, 1, 0, 1], bool)
    said = ["undecided", "present", "present", "absent", "present", "undecided", "absent",
            "absent"]
    result = compare_check(said, present, clear)
    assert (result.wrong_present, result.wrong_absent) == (1, 1)
    assert (result.undecided_clear, result.clear_frames) == (2, 7)
    assert result.visible_runs == ((True, (0, 4), 1), (False, (4, 6), None), (False, (7, 8), 0))


def test_true_zone_shift_agrees_with_the_renderers_camera(demo_zones: list[ZoneSpec]) -> None:
    """Reference: the renderer's CameraTransform.apply (what drew the frames)."""
    moves = [CameraTransform(), CameraTransform(10.0, -7.0, 1.1), CameraTransform(-3.0, 2.0, -0.4)]
    shifts = true_zone_shift_px([m.dx_px for m in moves], [m.dy_px for m in moves],
                                [m.rot_deg for m in moves], demo_zones)
    corners = [p for zone in demo_zones for p in zone.polygon_px]
    for move, shift in zip(moves, shifts, strict=True):
        assert shift == pytest.approx(max(true_shift_px(c, move) for c in corners), abs=1e-9)


def test_camera_comparison_finds_lag_and_false_alarms() -> None:
    shift = np.array([0.2, 0.3, 3.0, 6.0, 9.0, 9.0, 9.0])
    moved = np.array([0, 1, 0, 0, 0, 1, 1], bool)
    result = compare_camera(moved, shift, tolerance_px=4.0)
    assert (result.first_true_frame, result.first_judged_frame) == (3, 1)
    assert result.false_frames == 1 and result.unjudged_frames == 2
    assert compare_camera(np.zeros(3, bool), np.zeros(3), 4.0).lag is None
