"""Presence check under other camera looks: never the wrong class; the right one where the
picture allows (the looks come from the renderer's look knobs)."""

from __future__ import annotations

import numpy as np
import pytest

from stationcheck.config.judgement_settings import PresenceSettings
from stationcheck.core.plan import ZoneSpec
from stationcheck.demo_station.look import WARM_CAST_BGR, Look, LookFilter
from stationcheck.judgements.presence import PresenceJudge, TaughtClasses
from tests.judgements.conftest import FPS, Render

# (look, must it decide): the worst may stay undecided (it then never releases a unit)
LOOKS = [
    pytest.param(Look(gain=0.6, noise_sigma=3.0, jpeg_quality=40), True,
                 id="dim, noise 3, JPEG 40"),
    pytest.param(Look(gain=0.45, cast_bgr=WARM_CAST_BGR, vignette=0.35, noise_sigma=3.0), True,
                 id="dark, warm, vignette, noise 3"),
    pytest.param(Look(noise_sigma=6.0, jpeg_quality=15, blur_px=1.2), True,
                 id="noise 6, JPEG 15, blur"),
    pytest.param(Look(gain=0.45, cast_bgr=WARM_CAST_BGR, vignette=0.35, noise_sigma=6.0,
                      jpeg_quality=15, blur_px=1.2), False, id="all of them"),
]


@pytest.mark.parametrize(("look", "decides"), LOOKS)
@pytest.mark.parametrize("engaged", [True, False], ids=["engaged", "pulled"])
def test_a_poor_picture_never_gives_the_wrong_class(
    render: Render, zone_by_id: dict[str, ZoneSpec], pin_taught: TaughtClasses, look: Look,
    decides: bool, engaged: bool,
) -> None:
    zone = zone_by_id["locking_pin"]
    judge = PresenceJudge(zone.id, zone.polygon_px, (640, 480), pin_taught, PresenceSettings())
    camera = LookFilter(look, 640, 480, seed=5)
    said = []
    for k in range(16):
        image = camera.apply(render(engaged, seed=400 + k), np.random.default_rng(k))
        judge.decide(k / FPS, judge.score(image))
        said.append(judge.verdict)
    right = "present" if engaged else "absent"
    assert set(said) <= {right, "undecided"}, said
    if decides:
        assert said[-1] == right, said  # the zone's noise is learned within a few frames
