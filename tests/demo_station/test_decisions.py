"""The written rules that derive expected decisions, on small hand-made timelines."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest

from stationcheck.core.plan import (
    CheckStep,
    ConfirmStep,
    FastenStep,
    PickStep,
    StationPlan,
    Thresholds,
    ZoneSpec,
)
from stationcheck.demo_station.choreography import StationInput
from stationcheck.demo_station.decisions import expected_decisions
from stationcheck.errors import ConfigError
from stationcheck.pipeline.truth_rows import TruthRow

FPS = 30.0
SQUARE_1 = ((100.0, 100.0), (130.0, 100.0), (130.0, 130.0), (100.0, 130.0))
SQUARE_2 = ((200.0, 100.0), (230.0, 100.0), (230.0, 130.0), (200.0, 130.0))
PIN = ((300.0, 300.0), (320.0, 300.0), (320.0, 320.0), (300.0, 320.0))
AWAY = (50.0, 300.0)


def plan(dwell_ms: float = 200.0, grace_ms: float = 300.0) -> StationPlan:
    return StationPlan(
        zones=(
            ZoneSpec("screw_1", "fastener", SQUARE_1),
            ZoneSpec("screw_2", "fastener", SQUARE_2),
            ZoneSpec("locking_pin", "check", PIN),
        ),
        steps=(
            FastenStep("fasten", ("screw_1", "screw_2"), max_attempts=2),
            CheckStep("pin", "locking_pin"),
        ),
        thresholds=Thresholds(dwell_ms=dwell_ms, lost_track_grace_ms=grace_ms, hysteresis_px=4.0),
    )


def rows(n: int, where: Callable[[int], tuple[float, float, int]], pin: int = 0) -> list[TruthRow]:
    out = []
    for f in range(n):
        x, y, v = where(f)
        zone = ""
        for zid, sq in (("screw_1", SQUARE_1), ("screw_2", SQUARE_2)):
            if sq[0][0] <= x <= sq[1][0] and sq[0][1] <= y <= sq[2][1]:
                zone = zid
        out.append(
            TruthRow(
                f,
                f / FPS,
                x,
                y,
                v,
                x,
                y + 50,
                v,
                x,
                y,
                x,
                y + 50,
                zone,
                0,
                0,
                pin,
                1,
                0.0,
                0.0,
                0.0,
                "PC-1",
            )
        )
    return out


def started() -> StationInput:
    return StationInput(0, "unit_started", {"serial": "PC-1", "rework": False})


def kinds(decisions: list[dict[str, Any]], kind: str) -> list[dict[str, Any]]:
    return [d for d in decisions if d["kind"] == kind]


@pytest.mark.parametrize(
    ("dwell_ms", "enable_frame"), [(200.0, 16), (100.0, 13), (0.0, 10), (210.0, 17)]
)
def test_enable_comes_after_the_dwell(dwell_ms: float, enable_frame: int) -> None:
    """Tip enters screw_1 at frame 10; enabled at the first frame with (f - 10)/30 s >= dwell."""
    truth = rows(40, lambda f: (115.0, 115.0, 2) if f >= 10 else (*AWAY, 2))
    out = expected_decisions(plan(dwell_ms), truth, [started()], FPS)
    assert [(d["frame"], d["on"]) for d in kinds(out, "enable")][:1] == [(enable_frame, True)]


def test_running_where_the_station_inhibits_is_refused() -> None:
    truth = rows(40, lambda f: (115.0, 115.0, 2) if f >= 10 else (*AWAY, 2))
    early = [started(), StationInput(12, "tool_running", {"on": True})]
    with pytest.raises(ConfigError, match="frame 12: the scene script runs the tool"):
        expected_decisions(plan(), truth, early, FPS)


def test_result_completes_the_position_and_moves_the_target() -> None:
    truth = rows(60, lambda f: (115.0, 115.0, 2) if 10 <= f < 40 else (*AWAY, 2))
    inputs = [
        started(),
        StationInput(20, "tool_running", {"on": True}),
        StationInput(30, "tool_running", {"on": False}),
        StationInput(
            30,
            "tightening_result",
            {"ok": True, "torque_nm": 5.0, "angle_deg": 30.0, "sequence": 1},
        ),
    ]
    out = expected_decisions(plan(), truth, inputs, FPS)
    assert [(d["frame"], d["on"]) for d in kinds(out, "enable")] == [(16, True), (30, False)]
    assert kinds(out, "enable")[1]["reason"] == "result"
    (result,) = kinds(out, "position_result")
    assert (result["zone"], result["attempt"], result["ok"]) == ("screw_1", 1, True)
    assert kinds(out, "alarm") == []  # staying on the finished position is not a wrong position


@pytest.mark.parametrize(("outside_px", "drops"), [(3.0, False), (4.0, False), (5.0, True)])
def test_hysteresis_keeps_the_zone_near_its_edge(outside_px: float, drops: bool) -> None:
    truth = rows(
        50,
        lambda f: (
            (115.0, 115.0, 2)
            if 10 <= f < 30
            else ((130.0 + outside_px, 115.0, 2) if f >= 30 else (*AWAY, 2))
        ),
    )
    out = expected_decisions(plan(), truth, [started()], FPS)
    offs = [d for d in kinds(out, "enable") if not d["on"] and d["reason"] == "left_zone"]
    assert bool(offs) == drops


@pytest.mark.parametrize(("grace_ms", "lost_frame"), [(300.0, 30), (100.0, 24)])
def test_tool_lost_after_the_grace(grace_ms: float, lost_frame: int) -> None:
    """Last seen at frame 20: lost at the first frame more than the grace later."""
    truth = rows(60, lambda f: (*AWAY, 2) if f <= 20 else (0.0, 0.0, 0))
    out = expected_decisions(plan(grace_ms=grace_ms), truth, [started()], FPS)
    (lost,) = [d for d in kinds(out, "alarm") if d["alarm"] == "tool_lost"]
    assert (lost["frame"], lost["last_seen_frame"]) == (lost_frame, 20)


def test_wrong_position_after_dwell_and_once_per_visit() -> None:
    truth = rows(60, lambda f: (215.0, 115.0, 2) if 10 <= f < 45 else (*AWAY, 2))
    out = expected_decisions(plan(), truth, [started()], FPS)
    alarms = kinds(out, "alarm")
    assert [(a["frame"], a["alarm"], a["zone"], a["expected"]) for a in alarms] == [
        (16, "wrong_position", "screw_2", "screw_1")
    ]
    assert kinds(out, "enable") == []


def test_check_waits_for_the_pin_and_ack_gives_up() -> None:
    truth = rows(20, lambda f: (*AWAY, 2))
    plan_no_fasten = StationPlan(
        plan().zones, (CheckStep("pin", "locking_pin"),), plan().thresholds
    )
    out = expected_decisions(
        plan_no_fasten, truth, [started(), StationInput(12, "operator_ack")], FPS
    )
    assert [(d["frame"], d["kind"]) for d in out] == [
        (12, "check_result"),
        (12, "alarm"),
        (12, "unit_result"),
    ]
    assert out[-1]["result"] == "not_released"
    passed = expected_decisions(
        plan_no_fasten, rows(20, lambda f: (*AWAY, 2), pin=1), [started()], FPS
    )
    assert [(d["kind"], d.get("result")) for d in passed] == [
        ("check_result", None),
        ("unit_result", "OK"),
    ]


def test_confirm_step_is_done_on_an_ack_and_left_out_of_a_rework_pass() -> None:
    truth = rows(20, lambda f: (*AWAY, 2), pin=1)
    confirm_plan = StationPlan(plan().zones, (ConfirmStep("done", "Put the unit away"),
                                              CheckStep("pin", "locking_pin")), plan().thresholds)
    waiting = expected_decisions(confirm_plan, truth, [started()], FPS)
    assert waiting[-1]["reason"] == "end of recording"  # no ack: the unit stays at the confirm
    out = expected_decisions(confirm_plan, truth, [started(), StationInput(5, "operator_ack")],
                             FPS)
    assert [(d["frame"], d["kind"], d.get("step")) for d in out[:2]] == [
        (5, "step_done", "done"), (5, "check_result", "pin")]
    assert out[-1]["result"] == "OK"
    rework = StationInput(0, "unit_started", {"serial": "PC-1", "rework": True})
    again = expected_decisions(confirm_plan, truth, [rework], FPS)
    assert [d["kind"] for d in again] == ["check_result", "unit_result"]  # straight to the check


@pytest.mark.parametrize(("x_px", "lost"), [(0.5, True), (3.5, True), (4.5, False)])
def test_a_tip_on_the_pictures_edge_band_counts_as_gone(x_px: float, lost: bool) -> None:
    """The same band as the station's tracker: a tip on the border may lie just beyond it."""
    truth = rows(60, lambda f: (*AWAY, 2) if f <= 20 else (x_px, 115.0, 2))
    out = expected_decisions(plan(), truth, [started()], FPS, (640, 480))
    alarms = [d for d in kinds(out, "alarm") if d["alarm"] == "tool_lost"]
    assert [(a["frame"], a["last_seen_frame"]) for a in alarms] == ([(30, 20)] if lost else [])


def test_out_of_view_while_picking_is_an_alarm_only_once_a_fastener_is_due() -> None:
    """As the station's core: tool_lost is raised in the fasten phase only (the operator may
    lay the tool aside to pick a part)."""
    from dataclasses import replace

    bins = StationPlan(
        zones=(
            ZoneSpec("screw_1", "fastener", SQUARE_1),
            ZoneSpec("bin_gasket", "bin", ((400.0, 50.0), (450.0, 50.0), (450.0, 90.0), (400.0, 90.0))),  # noqa: E501
        ),
        steps=(PickStep("pick", "bin_gasket", 300.0), FastenStep("fasten", ("screw_1",))),
        thresholds=Thresholds(dwell_ms=200.0, lost_track_grace_ms=300.0, hysteresis_px=4.0),
    )
    truth = rows(90, lambda f: (*AWAY, 2) if f <= 10 else (0.0, 0.0, 0))
    truth = [replace(r, hand_in_bin_gasket=int(40 <= r.frame_index < 60)) for r in truth]
    out = expected_decisions(bins, truth, [started()], FPS)
    (picked,) = kinds(out, "step_done")
    lost = [d for d in kinds(out, "alarm") if d["alarm"] == "tool_lost"]
    # lost at frame 21 (the grace after frame 10) while picking: no alarm until the pick is done
    assert [(d["frame"], d["last_seen_frame"]) for d in lost] == [(picked["frame"], 10)]
    assert picked["frame"] > 21
