"""Presence check: taught classes judged under light, jitter and a covering hand.

The locking pin's true state and what covers its zone are chosen by each test (renders), so a
wrong verdict is a real error. The rule that matters most: a covered or changing zone is
undecided, never the wrong class, and never 'present' on an absent pin.
"""

from __future__ import annotations

import pytest

from stationcheck.config.judgement_settings import PresenceSettings
from stationcheck.core.observations import CheckVerdict
from stationcheck.core.plan import ZoneSpec
from stationcheck.demo_station.camera import CameraTransform
from stationcheck.errors import ConfigError
from stationcheck.judgements.presence import (
    REPEAT_S,
    PresenceJudge,
    TaughtClasses,
    class_template,
    normalised,
)
from stationcheck.judgements.zone_window import U8Array, zone_box_px
from tests.judgements.conftest import FPS, Render, cover_box

SIZE = (640, 480)


def judge_for(zone: ZoneSpec, taught: TaughtClasses, **settings: float) -> PresenceJudge:
    return PresenceJudge(zone.id, zone.polygon_px, SIZE, taught,
                         PresenceSettings(**settings))  # type: ignore[arg-type]


def verdicts(judge: PresenceJudge, images: list[U8Array]) -> list[str]:
    out = []
    for k, image in enumerate(images):
        judge.decide(k / FPS, judge.score(image))
        out.append(judge.verdict)
    return out


STILL_SCENES = [
    pytest.param(True, 1.0, None, "present", id="engaged"),
    pytest.param(False, 1.0, None, "absent", id="pulled"),
    pytest.param(True, 0.7, None, "present", id="engaged, 30 % darker"),
    pytest.param(False, 1.3, None, "absent", id="pulled, 30 % brighter"),
    pytest.param(True, 1.0, CameraTransform(2.0, -2.0, 0.2), "present", id="engaged, jitter 2 px"),
    pytest.param(False, 1.0, CameraTransform(-2.5, 1.5, -0.2), "absent", id="pulled, jitter 3 px"),
    pytest.param(True, 1.1, CameraTransform(2.5, 2.5, 0.0), "present", id="engaged, 3.5 px, light"),
]


@pytest.mark.parametrize(("engaged", "gain", "transform", "expected"), STILL_SCENES)
def test_a_still_zone_is_judged_as_taught(
    render: Render, zone_by_id: dict[str, ZoneSpec], pin_taught: TaughtClasses,
    engaged: bool, gain: float, transform: CameraTransform | None, expected: str,
) -> None:
    judge = judge_for(zone_by_id["locking_pin"], pin_taught)
    images = [render(engaged, transform, gain, seed=300 + k) for k in range(8)]
    said = verdicts(judge, images)
    # first frame: nothing to compare motion with; then 100 ms (3 frame steps) to confirm
    assert said[:4] == ["undecided"] * 4
    assert said[4:] == [expected] * 4


def test_margin_is_positive_for_present_and_negative_for_absent(
    render: Render, zone_by_id: dict[str, ZoneSpec], pin_taught: TaughtClasses
) -> None:
    judge = judge_for(zone_by_id["locking_pin"], pin_taught)
    present = judge.score(render(True, seed=400))
    absent = judge.score(render(False, seed=401))
    assert present.margin > 0.5 > -0.5 > absent.margin
    assert present.present_ncc > 0.9 and absent.absent_ncc > 0.9


def _cover_fraction(zone: ZoneSpec, fraction: float, from_left: bool) -> tuple[float, ...]:
    x0, y0, x1, y1 = zone_box_px(zone.polygon_px)
    width = (x1 - x0) * fraction
    return (x0, y0, x0 + width, y1 + 4) if from_left else (x1 - width, y0, x1, y1 + 4)


COVERS = [pytest.param(f, left, id=f"{int(f * 100)} % from the {'left' if left else 'right'}")
          for f in (0.15, 0.3, 0.5, 0.8, 1.0) for left in (True, False)]


@pytest.mark.parametrize(("fraction", "from_left"), COVERS)
@pytest.mark.parametrize("engaged", [True, False], ids=["engaged", "pulled"])
def test_a_hand_over_the_zone_never_gives_the_wrong_class(
    render: Render, zone_by_id: dict[str, ZoneSpec], pin_taught: TaughtClasses,
    fraction: float, from_left: bool, engaged: bool,
) -> None:
    zone = zone_by_id["locking_pin"]
    judge = judge_for(zone, pin_taught)
    box = _cover_fraction(zone, fraction, from_left)
    images = [cover_box(render(engaged, seed=500 + k), box) for k in range(8)]
    said = verdicts(judge, images)
    wrong = "absent" if engaged else "present"
    assert wrong not in said
    if fraction >= 0.3:
        assert set(said) == {"undecided"}


def test_a_hand_passing_through_the_zone_is_undecided_while_it_moves(
    render: Render, zone_by_id: dict[str, ZoneSpec], pin_taught: TaughtClasses
) -> None:
    zone = zone_by_id["locking_pin"]
    judge = judge_for(zone, pin_taught)
    x0, y0, x1, y1 = zone_box_px(zone.polygon_px)
    images = [render(False, seed=600 + k) for k in range(6)]
    for k in range(6):  # a finger (8 px wide) sweeps across the zone
        left = x0 - 8 + k * (x1 - x0 + 8) / 5
        images.append(cover_box(render(False, seed=610 + k), (left, y0 - 4, left + 8, y1 + 4)))
    said = verdicts(judge, images)
    assert said[4:6] == ["absent", "absent"]
    assert said[6:] == ["undecided"] * 6


def test_a_verdict_is_reported_on_change_and_repeated_for_late_listeners(
    render: Render, zone_by_id: dict[str, ZoneSpec], pin_taught: TaughtClasses
) -> None:
    judge = judge_for(zone_by_id["locking_pin"], pin_taught)
    reports: list[tuple[int, CheckVerdict]] = []
    for k in range(40):
        engaged = k >= 20
        report = judge.decide(k / FPS, judge.score(render(engaged, seed=700 + k)))
        if report is not None:
            reports.append((k, report))
    said = [(k, r.verdict) for k, r in reports]
    repeat = round(REPEAT_S * FPS)
    assert said == [(0, "undecided"), (4, "absent"), (4 + repeat, "absent"), (20, "undecided"),
                    (24, "present"), (24 + repeat, "present")]
    assert all(r.zone == "locking_pin" and r.t_s == pytest.approx(k / FPS) for k, r in reports)


def test_suppression_makes_the_zone_undecided_at_once(
    render: Render, zone_by_id: dict[str, ZoneSpec], pin_taught: TaughtClasses
) -> None:
    judge = judge_for(zone_by_id["locking_pin"], pin_taught)
    for k in range(6):
        judge.decide(k / FPS, judge.score(render(True, seed=800 + k)))
    assert judge.verdict == "present"
    report = judge.decide(6 / FPS, judge.score(render(True, seed=806)), suppressed=True)
    assert report is not None and report.verdict == "undecided"


@pytest.mark.parametrize(("min_match", "min_margin", "expected"), [
    (0.7, 0.3, "present"), (0.999, 0.3, "undecided"), (0.7, 1.99, "undecided")])
def test_thresholds_decide_how_sure_a_verdict_must_be(
    render: Render, zone_by_id: dict[str, ZoneSpec], pin_taught: TaughtClasses,
    min_match: float, min_margin: float, expected: str,
) -> None:
    judge = judge_for(zone_by_id["locking_pin"], pin_taught, min_match=min_match,
                      min_margin=min_margin)
    assert verdicts(judge, [render(True, seed=900 + k) for k in range(6)])[-1] == expected


def test_a_zone_of_another_size_than_taught_is_refused(
    zone_by_id: dict[str, ZoneSpec], pin_taught: TaughtClasses
) -> None:
    zone = zone_by_id["locking_pin"]
    bigger = ZoneSpec(zone.id, "check", ((418, 318), (480, 318), (480, 350), (418, 350)))
    with pytest.raises(ConfigError, match="taught at 52x32 px"):
        judge_for(bigger, pin_taught)


def test_a_moved_zone_of_the_same_size_uses_the_taught_appearance(
    render: Render, zone_by_id: dict[str, ZoneSpec], pin_taught: TaughtClasses
) -> None:
    """Zones re-mapped after a camera move keep their size: the check follows the new place."""
    zone = zone_by_id["locking_pin"]
    moved = ZoneSpec(zone.id, "check", tuple((x + 10, y - 7) for x, y in zone.polygon_px))
    judge = judge_for(moved, pin_taught)
    images = [render(True, CameraTransform(10.0, -7.0, 0.0), seed=950 + k) for k in range(6)]
    assert verdicts(judge, images)[-1] == "present"


def test_class_template_is_the_normalised_mean_of_normalised_crops() -> None:
    import numpy as np

    rng = np.random.default_rng(0)
    base = rng.normal(100.0, 20.0, (8, 10)).astype(np.float32)
    crops = [base * 0.5 + 10.0, base * 2.0 - 30.0]  # same pattern, other light
    template = class_template(crops)
    assert np.allclose(template, normalised(base), atol=1e-5)
    assert abs(float(template.mean())) < 1e-5 and abs(float(template.std()) - 1.0) < 1e-4


@pytest.mark.parametrize("level", [0, 128, 255], ids=["covered lens", "grey", "blinded"])
def test_a_featureless_view_is_undecided(
    zone_by_id: dict[str, ZoneSpec], pin_taught: TaughtClasses, level: int
) -> None:
    import numpy as np

    judge = judge_for(zone_by_id["locking_pin"], pin_taught)
    flat = np.full((480, 640, 3), level, np.uint8)
    said = verdicts(judge, [flat] * 8)
    assert set(said) == {"undecided"}
    assert judge.score(flat).reason == "no_match"
