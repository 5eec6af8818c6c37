"""Instructions and alarm words of the operator screen, from the demo plan and station outputs."""

from __future__ import annotations

from dataclasses import replace
from typing import Any

import pytest

from stationcheck.core.observations import PositionRef
from stationcheck.core.outputs import Guidance, Output
from stationcheck.core.plan import CheckStep, PickStep, StationPlan, ZoneSpec
from stationcheck.overlay.station_view import StationView, TighteningShown, UnitShown
from stationcheck.web.operator.screen_state import alarms_shown
from stationcheck.web.operator.wording import Wording, condition_alarm
from tests.web.operator.conftest import square


def output(kind: str, target: str | None = None, **changes: Any) -> Output:
    fields: dict[str, Any] = {
        "t_s": 5.0, "tool_enabled": False,
        "guidance": Guidance(kind, target, "the sequencer's own sentence"),  # type: ignore[arg-type]
        "unit_status": "running", "serial": "PC-000123", "step_id": "fasten_cover",
        "step_number": 3, "step_count": 4,
    }
    if kind in ("fasten", "rework", "wrong_position", "show_tool") and target is not None:
        fields.update(target=PositionRef("fasten_cover", target), position_number=2, attempt=1)
    fields.update(changes)
    return Output(**fields)


def view(out: Output, **changes: Any) -> StationView:
    return StationView(frame_index=1, t_s=out.t_s, output=out, **changes)


UNIT_NOK = UnitShown("PC-000123", False, "NOK", False, ("screw_3",), 9.0)
UNIT_OK = UnitShown("PC-000123", True, "OK", True, (), 9.0)
# the demo's first NOK at screw 3 (sample_video/demo_station_expected.jsonl) against the demo
# config's limits (torque 4.5-5.5 Nm, angle 15-45 deg)
NOK_3 = TighteningShown("screw_3", 2, 1, False, 3.92, 52.4, 8.0, (4.5, 5.5), (15.0, 45.0), 2)
NOK_3_INSIDE = replace(NOK_3, torque_nm=5.0, angle_deg=30.0)


@pytest.mark.parametrize(("out", "extra", "text", "detail", "meaning"), [
    (output("fasten", "screw_4"), {}, "Fasten position 4", "cover screw 4 · attempt 1 of 2",
     "action"),
    (output("fasten", "screw_3", attempt=2), {}, "Fasten position 3", "attempt 2 of 2", "action"),
    (output("rework", "screw_2", rework=True), {}, "Rework position 2", "Rework pass", "action"),
    (output("take_part", "bin_gasket", step_id="take_gasket", step_number=1), {},
     "Take a gasket from the left bin", "Step 1 of 4", "action"),
    (output("take_part", "bin_cover", step_id="take_cover", step_number=2), {},
     "Take a cover from the right bin", "Step 2 of 4", "action"),
    (output("wrong_bin", "bin_cover", step_id="take_cover"), {"wrong_bin": "bin_gasket"},
     "Wrong bin. Take a cover from the right bin", "gasket bin (left)", "abnormal"),
    (output("check", "locking_pin", step_id="pin_engaged"), {"check_verdict": "absent"},
     "Engage the locking pin", "locking pin: not there", "action"),
    (output("check", "locking_pin", step_id="pin_engaged"), {"check_verdict": "undecided"},
     "Engage the locking pin", "not clear yet", "action"),
    (output("fasten", "screw_3", attempt=2), {"last_tightening": NOK_3},
     "NOK at position 3: fasten it again",
     "Torque 3.92 Nm below its limit 4.50 Nm, angle 52.4° above its limit 45.0° · attempt 2 of 2",
     "abnormal"),
    (output("fasten", "screw_3", attempt=2), {"last_tightening": NOK_3_INSIDE},
     "NOK at position 3: fasten it again", "The tightening controller reported NOK",
     "abnormal"),
    (output("fasten", "screw_6"), {"last_tightening": NOK_3},
     "NOK at position 3: go on to position 6", "position 3 is left for rework", "fault"),
    (output("check", "locking_pin", step_id="pin_engaged", t_s=10.0),
     {"last_tightening": replace(NOK_3, zone="screw_6"), "failed_zones": ("screw_6",)},
     "NOK at position 6: left for rework", "· next: Engage the locking pin", "fault"),
    (output("check", "locking_pin", step_id="pin_engaged", t_s=20.0),
     {"last_tightening": replace(NOK_3, zone="screw_6"), "failed_zones": ("screw_6",)},
     "Engage the locking pin", "locking pin", "action"),  # NOK_SHOWN_S later
    (output("fasten", "screw_6"), {"last_tightening": replace(NOK_3, ok=True)},
     "Fasten position 6", "attempt 1 of 2", "action"),
    (output("wrong_position", "screw_4"), {"wrong_zone": "screw_5"},
     "Wrong position: go to position 4", "The tool is at position 5.", "abnormal"),
    (output("show_tool", "screw_4"), {}, "Bring the tool back into view", "position 4",
     "abnormal"),
    (output("inhibited", "screw_4", alarms=("camera_moved",)), {}, "Tool off: station fault",
     "Call setup", "fault"),
    (output("unit_finished", unit_status="nok"), {"last_unit": UNIT_NOK},
     "Unit PC-000123 NOK: to rework", "Not released. Rework needed at position 3.", "fault"),
    (output("unit_finished", unit_status="nok", guidance=Guidance(
        "unit_finished", None,
        "Unit PC-000123 not released: the check at fixture locking pin failed.")),
     {"last_unit": replace(UNIT_NOK, failed_zones=())}, "Unit PC-000123 NOK: to rework",
     "Not released: the check at fixture locking pin failed.", "fault"),
    (output("unit_finished", unit_status="aborted", guidance=Guidance(
        "unit_finished", None,
        "Unit PC-000123 ended unfinished (new_unit). Waiting for the next unit.")),
     {"last_unit": replace(UNIT_NOK, result="aborted", failed_zones=())},
     "Unit PC-000123 aborted", "ended unfinished", "fault"),
    (output("unit_finished", unit_status="ok"), {"last_unit": UNIT_OK},
     "Unit PC-000123 OK", "Released", "normal"),
    (output("wait_for_unit", serial=None, unit_status="idle", step_id=None, step_count=0), {},
     "Waiting for the next unit", "Load a unit", "neutral"),
])
def test_instruction_names_the_action_and_the_place(demo_plan: StationPlan, out: Output,
                                                     extra: dict[str, Any], text: str,
                                                     detail: str, meaning: str) -> None:
    said = Wording(demo_plan).instruction(view(out, **extra))
    assert said.text == text
    assert detail in said.detail
    assert said.meaning == meaning


@pytest.mark.parametrize(("label", "step_id", "expected"), [
    ("gasket bin (left)", "take_gasket", "Take a gasket from the left bin"),
    ("o-ring bin (front)", "take_ring", "Take an o-ring from the front bin"),
    ("washer bin", "take_washer", "Take a washer from the washer bin"),
    ("Kanban shelf 3", "pick_bracket", "Take a bracket from the Kanban shelf 3"),
    ("Kanban shelf 3", "grab_it", "Take the part from the Kanban shelf 3"),
])
def test_take_instruction_from_bin_labels(label: str, step_id: str, expected: str) -> None:
    plan = StationPlan(zones=(ZoneSpec("b", "bin", square(50, 50), label),),
                       steps=(PickStep(step_id, "b"),))
    assert Wording(plan).take_from("b", step_id) == expected


@pytest.mark.parametrize(("label", "expect", "expected"), [
    ("fixture locking pin", "present", "Engage the locking pin"),
    ("clamp", "present", "Engage the clamp"),
    ("spacer ring", "present", "Put the spacer ring in place"),
    ("protective cap", "absent", "Remove the protective cap"),
])
def test_check_instruction_from_zone_label(label: str, expect: str, expected: str) -> None:
    plan = StationPlan(zones=(ZoneSpec("c", "check", square(50, 50), label),),
                       steps=(CheckStep("chk", "c", expect),))  # type: ignore[arg-type]
    assert Wording(plan).check_action(plan.steps[0]) == expected  # type: ignore[arg-type]


@pytest.mark.parametrize(("code", "meaning", "todo_word"), [
    ("camera_moved", "fault", "setup"),
    ("link_lost", "fault", "maintenance"),
    ("tool_lost", "abnormal", "into view"),
    ("frame_stale", "fault", "camera"),
    ("some_new_code", "abnormal", ""),
])
def test_every_alarm_has_words_and_what_to_do(code: str, meaning: str, todo_word: str) -> None:
    found_meaning, words, todo = condition_alarm(code)
    assert found_meaning == meaning
    assert words
    assert todo_word in todo


def test_faults_are_listed_before_abnormal_then_recent_one_offs(demo_plan: StationPlan) -> None:
    out = output("inhibited", "screw_4", alarms=("camera_moved", "tool_lost"))
    out = replace(out, alarms=("tool_lost", "camera_moved"))
    shown = alarms_shown(view(out), ["ran_while_inhibited", "ran_while_inhibited"])
    assert [a["code"] for a in shown] == ["camera_moved", "tool_lost", "ran_while_inhibited"]
    assert all(a["words"] and a["meaning"] for a in shown)
