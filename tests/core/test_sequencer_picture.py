"""A picture too poor to judge fails closed: it inhibits, says so, and confirms no pick or check."""

from __future__ import annotations

from typing import Any

import pytest

from stationcheck.core.alarms import ALARMS
from tests.core.test_sequencer_steps import PICKS


@pytest.mark.parametrize(
    ("judgeable", "checkable", "code"),
    [(False, True, "cannot_judge"), (True, False, "camera_unchecked")],
)
def test_a_poor_picture_inhibits_with_its_own_alarm(
    fasten_only: Any, judgeable: bool, checkable: bool, code: str
) -> None:
    sc = fasten_only().unit("U-1").arrive("s1").mark("before")
    run = sc.picture(judgeable, checkable).mark("poor").picture().wait(34).run()
    assert run.at("before").tool_enabled
    assert not run.at("poor").tool_enabled
    assert run.at("poor").enable_reason == code
    assert code in run.at("poor").alarms and "camera_moved" not in run.at("poor").alarms
    assert run.raised() == [code]
    assert [e.code for e in run.of("alarm_cleared")] == [code]
    assert run.at("poor").guidance.kind == "inhibited"
    assert ALARMS[code].number in range(50, 60) and ALARMS[code].condition
    assert run.last.tool_enabled


def test_no_pick_is_confirmed_while_the_picture_cannot_be_judged(scenario: Any) -> None:
    run = scenario(PICKS).unit("U-1").picture(False).pick("bin_a", 800).run()
    assert run.of("step_completed") == []
    assert run.last.step_id == "take_a"


def test_the_pick_waits_for_activity_once_the_picture_is_back(scenario: Any) -> None:
    run = scenario(PICKS).unit("U-1").picture(False).wait(500).picture().pick("bin_a").run()
    assert [e.step for e in run.of("step_completed")] == ["take_a"]


def test_no_check_passes_while_the_picture_cannot_be_judged(scenario: Any) -> None:
    sc = scenario().unit("U-1").tip(None, 50).pick().fasten_all().picture(False)
    run = sc.verdict("chk", "present").wait(100).run()
    assert run.last.step_id == "pin"
    assert run.of("step_completed")[-1].step != "pin"


def test_the_picture_figures_go_to_the_open_units_log(fasten_only: Any) -> None:
    run = fasten_only().picture().unit("U-1").picture(False).run()
    logged = run.of("picture_quality")
    assert len(logged) == 1 and logged[0].serial == "U-1"
    assert (logged[0].judgeable, logged[0].brightness) == (False, 40.0)
