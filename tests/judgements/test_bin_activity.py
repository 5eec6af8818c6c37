"""Bin activity: a reach into a bin is seen within a few frames; light, jitter and noise are not.

The frames are renders of the demo station with a hand-and-forearm shape drawn into them, so
when and where something reaches in is known exactly.
"""

from __future__ import annotations

from collections.abc import Callable

import pytest

from stationcheck.config.judgement_settings import BinActivitySettings
from stationcheck.core.observations import BinActivity
from stationcheck.core.plan import ZoneSpec
from stationcheck.demo_station.camera import CameraTransform
from stationcheck.judgements import bin_activity
from stationcheck.judgements.bin_activity import BinActivityJudge
from stationcheck.judgements.zone_window import U8Array
from tests.judgements.conftest import FPS, Render, reach_into, zone_centre

SIZE = (640, 480)


def run(judge: BinActivityJudge, images: list[U8Array],
        suppressed: Callable[[int], bool] = lambda k: False) -> list[tuple[int, BinActivity]]:
    out = []
    for k, image in enumerate(images):
        t_s = k / FPS
        obs = judge.decide(t_s, judge.measure(t_s, image), suppressed(k))
        if obs is not None:
            out.append((k, obs))
    return out


def bin_judge(render: Render, zone: ZoneSpec, **settings: float) -> BinActivityJudge:
    """A judge of ``zone`` that learned the empty bin from a render."""
    return BinActivityJudge(zone.id, zone.polygon_px, SIZE, BinActivitySettings(**settings),
                            render(seed=1))


def reach(render: Render, zone: ZoneSpec, seed: int, depth: float = 1.0) -> U8Array:
    cx, cy = zone_centre(zone)
    elbow = (cx + 40.0, 560.0)
    tip = (elbow[0] + depth * (cx - elbow[0]), elbow[1] + depth * (cy - elbow[1]))
    return reach_into(render(seed=seed), tip, elbow)


@pytest.mark.parametrize("zone_id", ["bin_gasket", "bin_cover"])
def test_a_reach_turns_the_bin_active_and_calm_again(
    render: Render, zone_by_id: dict[str, ZoneSpec], zone_id: str
) -> None:
    zone = zone_by_id[zone_id]
    judge = bin_judge(render, zone)
    images = ([render(seed=10 + k) for k in range(10)]
              + [reach(render, zone, seed=30 + k) for k in range(15)]
              + [render(seed=60 + k) for k in range(10)])
    said = run(judge, images)
    # settle 50 ms: the third changed frame at 30 fps; release 100 ms: the fourth calm frame
    assert [(k, obs.zone, obs.active) for k, obs in said] == [(12, zone_id, True),
                                                               (28, zone_id, False)]
    assert said[0][1].t_s == pytest.approx(12 / FPS)


def test_a_short_glance_shorter_than_settle_time_is_not_activity(
    render: Render, zone_by_id: dict[str, ZoneSpec]
) -> None:
    zone = zone_by_id["bin_cover"]
    judge = bin_judge(render, zone, settle_ms=100.0)
    images = [render(seed=k) for k in range(5)] + [reach(render, zone, 9), reach(render, zone, 8)]
    images += [render(seed=20 + k) for k in range(5)]
    assert run(judge, images) == []


LIGHT_AND_CAMERA = [
    pytest.param([1.0] * 30, None, id="steady"),
    pytest.param([1.0] * 5 + [0.8] * 25, None, id="light drops 20 % at once"),
    pytest.param([1.0] * 5 + [1.2] * 25, None, id="light rises 20 % at once"),
    pytest.param([1.0 + 0.15 * k / 29 for k in range(30)], None, id="light drifts 15 % in 1 s"),
    pytest.param([1.0] * 30, CameraTransform(0.5, -0.4, 0.05), id="camera jitter 0.6 px"),
]


@pytest.mark.parametrize(("gains", "transform"), LIGHT_AND_CAMERA)
def test_light_changes_jitter_and_noise_are_not_activity(
    render: Render, zone_by_id: dict[str, ZoneSpec], gains: list[float],
    transform: CameraTransform | None,
) -> None:
    images = [render(gain=g, seed=100 + k, transform=transform if k % 2 else None)
              for k, g in enumerate(gains)]
    for zone_id in ("bin_gasket", "bin_cover"):
        judge = bin_judge(render, zone_by_id[zone_id])
        assert run(judge, images) == [], zone_id


def test_without_light_correction_a_light_step_would_look_like_activity(
    render: Render, zone_by_id: dict[str, ZoneSpec], monkeypatch: pytest.MonkeyPatch
) -> None:
    """The same light step as above, with the zone's gain held at 1, is (wrongly) seen: it is
    the correction, not luck, that keeps the previous test quiet."""
    monkeypatch.setattr(bin_activity, "GAIN_RANGE", (1.0, 1.0))
    judge = bin_judge(render, zone_by_id["bin_cover"])
    images = [render(gain=1.0 if k < 5 else 1.2, seed=100 + k) for k in range(30)]
    assert [obs.active for _, obs in run(judge, images)][:1] == [True]


def test_a_hand_held_still_for_ten_seconds_stays_active(
    render: Render, zone_by_id: dict[str, ZoneSpec]
) -> None:
    zone = zone_by_id["bin_gasket"]
    judge = bin_judge(render, zone)
    held = reach(render, zone, seed=5)
    images = [render(seed=k) for k in range(5)] + [held] * 300  # 10 s with the hand still
    said = run(judge, images)
    assert [(k, obs.active) for k, obs in said] == [(7, True)]


def test_suppression_turns_an_active_bin_off_and_blocks_new_onsets(
    render: Render, zone_by_id: dict[str, ZoneSpec]
) -> None:
    zone = zone_by_id["bin_cover"]
    judge = bin_judge(render, zone)
    images = [render(seed=k) for k in range(3)] + [reach(render, zone, 40 + k) for k in range(12)]
    said = run(judge, images, suppressed=lambda k: k >= 8)
    assert [(k, obs.active) for k, obs in said] == [(5, True), (8, False)]


@pytest.mark.parametrize(("fraction", "expected"), [(0.05, True), (0.6, False)])
def test_changed_fraction_sets_how_much_of_the_bin_must_change(
    render: Render, zone_by_id: dict[str, ZoneSpec], fraction: float, expected: bool
) -> None:
    zone = zone_by_id["bin_gasket"]
    judge = bin_judge(render, zone, changed_fraction=fraction)
    images = [render(seed=k) for k in range(3)] + [reach(render, zone, 40 + k, depth=0.9)
                                                   for k in range(8)]
    assert bool(run(judge, images)) is expected


def test_something_left_lying_in_a_bin_stops_counting_after_about_half_a_minute(
    render: Render, zone_by_id: dict[str, ZoneSpec]
) -> None:
    zone = zone_by_id["bin_gasket"]
    judge = bin_judge(render, zone)
    left = reach(render, zone, seed=5)
    said = run(judge, [render(seed=2)] * 3 + [left] * int(45 * FPS))
    assert [obs.active for _, obs in said] == [True, False]
    calm_after_s = (said[1][0] - said[0][0]) / FPS
    assert 20.0 <= calm_after_s <= 40.0


def run_with_tip(judge: BinActivityJudge, images: list[U8Array],
                 tips: list[tuple[float, float] | None]) -> list[tuple[int, bool]]:
    out = []
    for k, (image, tip) in enumerate(zip(images, tips, strict=True)):
        judge.tool_seen(k / FPS, tip)
        obs = judge.decide(k / FPS, judge.measure(k / FPS, image))
        if obs is not None:
            out.append((k, obs.active))
    return out


def test_the_tools_position_gates_a_reach(render: Render,
                                          zone_by_id: dict[str, ZoneSpec]) -> None:
    """The hand that reaches holds the tool: a change with the tip seen far away is no reach,
    and an active bin turns calm once the tip is seen away from it."""
    zone = zone_by_id["bin_cover"]
    images = [render(seed=k) for k in range(3)] + [reach(render, zone, 40 + k) for k in range(32)]
    at_bin, far = zone_centre(zone), (100.0, 420.0)
    assert run_with_tip(bin_judge(render, zone), images, [far] * 35) == []
    assert run_with_tip(bin_judge(render, zone), images, [at_bin] * 35) == [(5, True)]
    assert run_with_tip(bin_judge(render, zone), images, [None] * 35) == [(5, True)]
    leaves = [at_bin] * 10 + [far] * 25  # the tip leaves; the arm stays over the bin
    said = run_with_tip(bin_judge(render, zone), images, leaves)
    # away once the tip was last near over 0.5 s ago (frame 25 > 9 + 15), calm 100 ms later
    assert said == [(5, True), (28, False)]
