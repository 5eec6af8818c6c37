"""The operator screen says whether the camera picture can be judged, with its figures."""

from __future__ import annotations

from functools import partial

import pytest

from stationcheck.core.observations import PictureState
from stationcheck.core.plan import StationPlan
from stationcheck.web.operator.feed import OperatorFeed
from stationcheck.web.operator.screen_state import picture_state
from tests.web.operator.conftest import Station, wait_frame


@pytest.mark.parametrize(("judgeable", "checkable", "meaning", "words"), [
    (True, True, "normal", "Picture good enough to judge"),
    (False, True, "fault", "Cannot judge bins and checks"),
    (False, False, "fault", "too dark or too noisy to check the camera"),
])
def test_picture_words_follow_the_state(judgeable: bool, checkable: bool, meaning: str,
                                        words: str) -> None:
    shown = picture_state(PictureState(1.0, judgeable, checkable, "" if judgeable else "noisy",
                                       brightness=41.2, noise_sigma=6.04, blockiness=2.5))
    assert shown is not None
    assert shown["meaning"] == meaning and words in shown["words"]
    assert ["brightness", "41"] in shown["figures"] and ["noise", "6.0"] in shown["figures"]
    assert picture_state(None) is None


def test_the_feed_shows_the_latest_picture_state(confirm_plan: StationPlan) -> None:
    station = Station(confirm_plan)
    feed = OperatorFeed(confirm_plan, mode="live")
    try:
        feed.on_step(station.apply(partial(PictureState, judgeable=False, camera_checkable=True,
                                           reason="too strongly compressed", blockiness=9.1)))
        feed.on_frame(station.frame())
        frame = wait_frame(feed, lambda f: f.steady.get("picture") is not None, "picture box")
        assert frame.steady["picture"]["reason"] == "too strongly compressed"
        assert "cannot_judge" in [a["code"] for a in frame.steady["alarms"]]
    finally:
        feed.close()
