"""All judgements together: order of observations, and what a camera bump does to the others."""

from __future__ import annotations

import pytest

from stationcheck.config.judgement_settings import JudgementSettings
from stationcheck.core.observations import BinActivity, CameraMoved, CheckVerdict
from stationcheck.core.plan import ZoneSpec
from stationcheck.core.records import Frame
from stationcheck.demo_station.camera import CameraTransform
from stationcheck.errors import InputFileError
from stationcheck.judgements.presence import REPEAT_S, TaughtClasses
from stationcheck.judgements.station import StationJudgements
from stationcheck.judgements.zone_window import U8Array
from tests.judgements.conftest import FPS, Render, frames_of, reach_into, zone_centre

NUDGE = CameraTransform(10.0, -7.0, 1.1)


def judgements(render: Render, zones: list[ZoneSpec],
               taught: TaughtClasses | None) -> StationJudgements:
    return StationJudgements(zones, render(seed=1), JudgementSettings(),
                             {"locking_pin": taught})


def observe_all(judge: StationJudgements, frames: list[Frame]) -> list[tuple[int, object]]:
    return [(frame.index, obs) for frame in frames for obs in judge.observe(frame)]


def test_a_camera_bump_is_not_taken_for_a_reach_into_the_bins(
    render: Render, demo_zones: list[ZoneSpec], pin_taught: TaughtClasses
) -> None:
    judge = judgements(render, demo_zones, pin_taught)
    images = ([render(False, seed=10 + k) for k in range(20)]
              + [render(False, NUDGE, seed=40 + k) for k in range(30)])
    said = observe_all(judge, frames_of(images))
    assert not [obs for _, obs in said if isinstance(obs, BinActivity)]
    moved = [(k, obs) for k, obs in said if isinstance(obs, CameraMoved)]
    assert len(moved) == 1 and moved[0][1].moved and 20 <= moved[0][0] <= 23
    assert moved[0][1].shift_px == pytest.approx(18.0, abs=2.0)
    verdicts = [(k, obs.verdict) for k, obs in said if isinstance(obs, CheckVerdict)]
    assert [v for k, v in verdicts if k >= 20] == ["undecided"] * len([k for k, _ in verdicts
                                                                       if k >= 20])
    assert ("present" not in {v for _, v in verdicts})


def test_camera_moved_comes_first_and_the_check_is_undecided_by_then(
    render: Render, demo_zones: list[ZoneSpec], pin_taught: TaughtClasses
) -> None:
    judge = judgements(render, demo_zones, pin_taught)
    images = [render(True, seed=k) for k in range(10)] + [render(True, NUDGE, seed=20 + k)
                                                          for k in range(10)]
    undecided_from = None
    for frame in frames_of(images):
        said = judge.observe(frame)
        kinds = [obs.kind for obs in said]
        if frame.index >= 10 and undecided_from is None and any(
                isinstance(obs, CheckVerdict) and obs.verdict == "undecided" for obs in said):
            undecided_from = frame.index
        if "camera_moved" in kinds:
            assert kinds[0] == "camera_moved"
            assert undecided_from is not None and undecided_from <= frame.index
            break
    else:
        pytest.fail("the camera move was not reported")


def test_after_the_camera_is_back_the_bins_start_again_from_the_reference(
    render: Render, demo_zones: list[ZoneSpec], zone_by_id: dict[str, ZoneSpec]
) -> None:
    judge = judgements(render, demo_zones, None)
    bin_zone = zone_by_id["bin_cover"]
    cx, cy = zone_centre(bin_zone)
    images = ([render(seed=k) for k in range(10)]
              + [render(transform=NUDGE, seed=20 + k) for k in range(60)]
              + [render(seed=100 + k) for k in range(20)]
              + [reach_into(render(seed=200 + k), (cx, cy), (cx + 40, 560.0))
                 for k in range(10)])
    said = observe_all(judge, frames_of(images))
    moves = [(k, obs.moved) for k, obs in said if isinstance(obs, CameraMoved)]
    assert [m for _, m in moves] == [True, False]
    assert 70 <= moves[1][0] <= 70 + 6 + 1  # the next scheduled check, then one to confirm
    bins = [(k, obs.zone, obs.active) for k, obs in said if isinstance(obs, BinActivity)]
    assert bins == [(92, "bin_cover", True)]


def test_an_untaught_check_zone_stays_undecided_and_says_so_regularly(
    render: Render, demo_zones: list[ZoneSpec]
) -> None:
    judge = judgements(render, demo_zones, None)
    said = observe_all(judge, frames_of([render(True, seed=k) for k in range(31)]))
    verdicts = [(k, obs.verdict) for k, obs in said if isinstance(obs, CheckVerdict)]
    step = round(REPEAT_S * FPS)
    assert verdicts == [(0, "undecided"), (step, "undecided"), (2 * step, "undecided")]


def test_a_frame_of_another_size_is_refused(
    render: Render, demo_zones: list[ZoneSpec]
) -> None:
    judge = judgements(render, demo_zones, None)
    small: U8Array = render(seed=3)[:240, :320].copy()
    with pytest.raises(InputFileError, match="320x240 px"):
        judge.observe(Frame(0, 0.0, small))


def test_costs_are_kept_per_judgement(render: Render, demo_zones: list[ZoneSpec],
                                      pin_taught: TaughtClasses) -> None:
    judge = judgements(render, demo_zones, pin_taught)
    judge.observe(Frame(0, 0.0, render(seed=4)))
    assert set(judge.last_costs_ms) == {"camera_shift", "bin_activity", "presence",
                                        "picture_quality"}
    assert all(cost >= 0.0 for cost in judge.last_costs_ms.values())
    assert judge.last_costs_ms["camera_shift"] > 0.0  # the first frame always checks
