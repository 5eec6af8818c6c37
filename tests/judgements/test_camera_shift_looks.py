"""Camera check under other looks: a real move is measured, a still camera is not moved, and a
picture too dark to use says so instead of calling a move."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest

from stationcheck.config.judgement_settings import CameraShiftSettings
from stationcheck.core.plan import ZoneSpec
from stationcheck.demo_station.camera import CameraTransform
from stationcheck.demo_station.look import WARM_CAST_BGR, Look, LookFilter
from stationcheck.judgements.camera_shift import CameraShiftJudge, ReferenceView
from tests.judgements.conftest import Render, true_shift_px

DARK = Look(gain=0.45, cast_bgr=WARM_CAST_BGR, vignette=0.35)
LOOKS = [
    pytest.param(replace(DARK, noise_sigma=3.0), id="dark, warm, vignette, noise 3"),
    pytest.param(Look(noise_sigma=6.0, jpeg_quality=15, blur_px=1.2), id="noise 6, JPEG 15, blur"),
    pytest.param(replace(DARK, noise_sigma=6.0, jpeg_quality=15, blur_px=1.2), id="all of them"),
]
MOVES = [CameraTransform(0.0, 0.0, 0.0), CameraTransform(4.0, 3.0, 0.0),
         CameraTransform(10.0, -7.0, 1.1)]


@pytest.mark.parametrize("look", LOOKS)
def test_moves_are_measured_under_poor_looks(render: Render, demo_zones: list[ZoneSpec],
                                             look: Look) -> None:
    view = ReferenceView(render(seed=1), demo_zones)
    camera = LookFilter(look, 640, 480, seed=3)
    corners = [p for z in demo_zones for p in z.polygon_px]
    for k, move in enumerate(MOVES):
        image = camera.apply(render(transform=move, seed=20 + k), np.random.default_rng(k))
        estimate = view.estimate(image)
        truth = max(true_shift_px(p, move) for p in corners)  # the renderer's own transform
        assert estimate is not None, move
        assert estimate.shift_px == pytest.approx(truth, abs=1.5), move
        assert estimate.residual_px <= 1.5


def test_a_black_picture_cannot_check_the_camera_and_is_not_a_move(
    render: Render, demo_zones: list[ZoneSpec]
) -> None:
    judge = CameraShiftJudge(ReferenceView(render(seed=1), demo_zones), CameraShiftSettings())
    black = np.full((480, 640, 3), 3, np.uint8)  # lens covered or lamp off
    said = [judge.check(k * 0.2, black) for k in range(25)]  # 5 s, past the 3 s for a move
    assert [obs for obs in said if obs is not None] == []
    assert judge.unchecked and not judge.moved
