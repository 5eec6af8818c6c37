"""Schema rows: each change to a valid config and exactly what checking it must report."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest

from stationcheck.config import CheckResult

DELETE = "<delete>"
OCTAGON_CIRCLE = {"id_prefix": "bolt_", "centre_px": [320, 240], "radius_px": 100, "count": 8,
                  "zone_size_px": 30}

GOOD: list[Any] = [
    pytest.param([], id="base config"),
    pytest.param([("camera.source", "videos/dry run.mp4")], id="camera from a video file"),
    pytest.param([("camera.source", "rtsp://10.0.0.5/stream1")], id="camera from a stream URL"),
    pytest.param([("model", {"path": "models/tool.onnx", "threads": 2, "min_score": 0.3})],
                 id="model file"),
    pytest.param([("thresholds", DELETE)], id="thresholds default"),
    pytest.param([("plc", {"mode": "client", "host": "192.168.0.10", "port": 502,
                           "device_id": 3, "timeout_ms": 30, "retries": 1})], id="plc client"),
    pytest.param([("log", {"path": "logs/station.sqlite", "evidence_images": True,
                           "retention_days": 30})], id="log with evidence images"),
    pytest.param([("steps[1].torque_nm", {"low": 4.5, "high": 4.5}),
                  ("steps[1].angle_deg", {"low": 0, "high": 90})], id="limits low == high"),
    pytest.param([("steps[1].order", "cross"), ("steps[1].on_failure", "stop_unit"),
                  ("steps[1].max_attempts", 1)], id="fasten options"),
    pytest.param([("steps[4]", {"id": "fasten_final", "kind": "fasten",
                                "zones": ["screw_b", "screw_a"]})],
                 id="second tightening pass over the same zones"),
    pytest.param([("zones[4]", {"bolt_circle": OCTAGON_CIRCLE}),
                  ("steps[4]", {"id": "flange", "kind": "fasten", "order": "cross",
                                "zones": [f"bolt_{n}" for n in range(1, 9)]})],
                 id="bolt circle shorthand"),
    pytest.param([("plc.address_map", {
        "tool_enable": {"table": "coil", "address": 0},
        "tool_running": {"table": "discrete_input", "address": 0},
        "serial": {"table": "input_register", "address": 0, "count": 10},
        "heartbeat": {"table": "holding_register", "address": 0},
        "step_number": {"table": "holding_register", "address": 1}})], id="address map"),
    pytest.param([("judgements", {
        "bin_activity": {"changed_fraction": 0.1, "settle_ms": 0, "release_ms": 250},
        "presence": {"min_match": 0.8, "min_margin": 0.5, "confirm_ms": 200, "search_px": 0},
        "camera_shift": {"tolerance_px": 6, "interval_ms": 500, "confirm_checks": 3}})],
        id="image judgements tuned"),
]

BAD: list[Any] = [
    pytest.param([("plc.serial_pattern", "PC-("), ("plc.liveness_timeout_ms", 5)], [
        ("error", "plc.serial_pattern", "not a regular expression"),
        ("error", "plc.liveness_timeout_ms", "20")], id="plc session fields"),
    pytest.param([("zone", [])], [
        ("error", "zone", "unknown key 'zone'; did you mean 'zones'?")], id="unknown top key"),
    pytest.param([("camera.widht_px", 640), ("camera.width_px", DELETE)], [
        ("error", "camera.widht_px", "unknown key 'widht_px'; did you mean 'width_px'?"),
        ("error", "camera.width_px", "required, but missing")], id="misspelt key"),
    pytest.param([("thresholds.min_score", 0.4)], [
        ("error", "thresholds.min_score", "'min_score' belongs under 'model'")],
        id="key in the wrong section"),
    pytest.param([("format_version", 2)], [
        ("error", "format_version", "reads format_version 1; the file says 2")],
        id="newer format"),
    pytest.param([("format_version", DELETE)], [
        ("error", "format_version", "start the file with 'format_version: 1'")],
        id="no format version"),
    pytest.param([("station.name", "  ")], [("error", "station.name", "must not be empty")],
                 id="blank name"),
    pytest.param([("camera.width_px", "640")], [
        ("error", "camera.width_px", "expected a whole number, got the text '640'")],
        id="number as text"),
    pytest.param([("camera.height_px", 0)], [
        ("error", "camera.height_px", "must be more than 0, got 0")], id="zero height"),
    pytest.param([("camera.fps", True)], [
        ("error", "camera.fps", "expected a number, got true")], id="bool as number"),
    pytest.param([("camera.source", -1)], [
        ("error", "camera.source", ("expected a camera index (0, 1, ...), a video file path or "
         "a stream URL; got the number -1"))], id="negative camera index"),
    pytest.param([("camera.source", [0])], [
        ("error", "camera.source", "got a list of 1 item")], id="camera source list"),
    pytest.param([("model", {"path": "tool.pt"})], [
        ("error", "model.path", "expected 'bundled' or the path of an .onnx file; got 'tool.pt'")],
        id="model not onnx"),
    pytest.param([("model", {"min_score": 1.5})], [
        ("error", "model.min_score", "1.5 is above the allowed 0.99: the calibrated score")], id="score above 1"),
    pytest.param([("model", {"threads": 0})], [
        ("error", "model.threads", "must be at least 1, got 0")], id="zero threads"),
    pytest.param([("thresholds.dwell_ms", -1)], [
        ("error", "thresholds.dwell_ms", "-1 ms is below the allowed 0 ms")], id="negative dwell"),
    pytest.param([("thresholds.hysteresis_px", "4px")], [
        ("error", "thresholds.hysteresis_px", "expected a number, got the text '4px'")],
        id="unit in a number"),
    pytest.param([("thresholds.dwell_ms", float("nan"))], [
        ("error", "thresholds.dwell_ms", "expected a finite number")], id="not a number"),
    pytest.param([("zones[0].kind", "screw")], [
        ("error", "zones[0].kind", "expected 'fastener', 'bin' or 'check', got the text 'screw'")],
        id="unknown zone kind"),
    pytest.param([("zones[0].kind", DELETE)], [
        ("error", "zones[0].kind", "required, but missing")], id="zone without kind"),
    pytest.param([("zones[0].id", "screw a"), ("steps[1].zones[0]", "screw a")], [
        ("error", "zones[0].id", "'screw a' is not a usable id"),
        ("error", "steps[1].zones[0]", "'screw a' is not a usable id")], id="id with a space"),
    pytest.param([("steps[0].zone", ""), ("steps[2].zone", "")], [
        ("error", "steps[0].zone", "is empty: choose or write a name"),
        ("error", "steps[2].zone", "is empty: choose or write a name"),
        ("warning", "zones[2]", "zone 'bin_a' is not used"),
        ("warning", "zones[3]", "zone 'pin' is not used")],
        id="new steps with no zone chosen: one finding each"),
    pytest.param([("zones[0].polygon[1]", [1, 2, 3])], [
        ("error", "zones[0].polygon[1]", ("a point is a pair [x, y] of pixel numbers; got a list "
         "of 3 items"))], id="point with three numbers"),
    pytest.param([("zones[0].polygon", "100,100 130,100 130,130")], [
        ("error", "zones[0].polygon", "expected a list")], id="polygon as text"),
    pytest.param([("zones[0].polygon[0]", ["a", 1])], [
        ("error", "zones[0].polygon[0][0]", "expected a number, got the text 'a'")],
        id="coordinate as text"),
    pytest.param([("zones[0].colour", "red")], [
        ("error", "zones[0].colour", ("unknown key 'colour' (allowed here: id, kind, label, "
         "polygon)"))], id="unknown zone key"),
    pytest.param([("zones[4]", {"bolt_circle": {**OCTAGON_CIRCLE, "count": 1}})], [
        ("error", "zones[4].bolt_circle.count", "must be at least 2, got 1"),
        ("warning", "zones[4].bolt_circle", "zone 'bolt_1' is not used by any step")],
        id="bolt circle of one"),
    pytest.param([("zones[4]", {"bolt_circle": {**OCTAGON_CIRCLE, "size": 3}})], [
        ("error", "zones[4].bolt_circle.size", "unknown key 'size'"),
        ("warning", "zones[4].bolt_circle", ("zones bolt_1, bolt_2, bolt_3, bolt_4, bolt_5, "
         "bolt_6, bolt_7, bolt_8 are not used by any step"))],
        id="unknown bolt circle key"),
    pytest.param([("steps[1].kind", "screw")], [
        ("error", "steps[1].kind", ("'screw' is not a kind of step; use 'fasten', 'pick', "
         "'check' or 'confirm'"))], id="unknown step kind"),
    pytest.param([("steps[1].kind", DELETE)], [
        ("error", "steps[1].kind", ("missing; say which kind of step this is: 'fasten', "
         "'pick', 'check' or 'confirm'"))],
        id="step without kind"),
    pytest.param([("steps[1].zones", [])], [
        ("error", "steps[1].zones", "needs at least 1 item, got 0"),
        ("warning", "zones[0]", "zone 'screw_a' is not used by any step"),
        ("warning", "zones[1]", "zone 'screw_b' is not used by any step")],
        id="fasten with no zones"),
    pytest.param([("steps[1].max_attempts", 0)], [
        ("error", "steps[1].max_attempts", "must be at least 1, got 0")], id="no attempts"),
    pytest.param([("steps[1].on_failure", "retry")], [
        ("error", "steps[1].on_failure", "expected 'continue' or 'stop_unit'")],
        id="unknown failure policy"),
    pytest.param([("steps[1].order", "star")], [
        ("error", "steps[1].order", "expected 'listed' or 'cross', got the text 'star'")],
        id="unknown order"),
    pytest.param([("steps[1].torque_nm", {"low": 6, "high": 5})], [
        ("error", "steps[1].torque_nm", "low (6) is above high (5); no value could pass")],
        id="torque low above high"),
    pytest.param([("steps[1].angle_deg", {"low": 90, "high": 10.5})], [
        ("error", "steps[1].angle_deg", "low (90) is above high (10.5)")],
        id="angle low above high"),
    pytest.param([("steps[1].angle_deg", {"low": 10})], [
        ("error", "steps[1].angle_deg.high", "required, but missing")], id="angle without high"),
    pytest.param([("steps[0].zones", ["bin_a"])], [
        ("error", "steps[0].zones", "unknown key 'zones'; did you mean 'zone'?")],
        id="pick with a zone list"),
    pytest.param([("steps[0].min_time_ms", -5)], [
        ("error", "steps[0].min_time_ms", "-5 ms is below the allowed 0 ms")],
        id="negative pick time"),
    pytest.param([("steps[2].expect", "maybe")], [
        ("error", "steps[2].expect", "expected 'present' or 'absent', got the text 'maybe'")],
        id="unknown expectation"),
    pytest.param([("steps[3].prompt", "")], [
        ("error", "steps[3].prompt", "must not be empty")], id="empty prompt"),
    pytest.param([("steps[3].id", DELETE)], [
        ("error", "steps[3].id", "required, but missing")], id="step without id"),
    pytest.param([("steps[4]", "fasten all")], [
        ("error", "steps[4]", "expected a mapping (key: value lines), got the text 'fasten all'")],
        id="step as text"),
    pytest.param([("steps", [])], [
        ("error", "steps", "needs at least 1 item, got 0"),
        ("warning", "zones[0]", "not used"), ("warning", "zones[1]", "not used"),
        ("warning", "zones[2]", "not used"), ("warning", "zones[3]", "not used")],
        id="no steps"),
    pytest.param([("plc", {"mode": "modbus"})], [
        ("error", "plc.mode", "expected 'console', 'client' or 'server', got the text 'modbus'")],
        id="unknown plc mode"),
    pytest.param([("plc", {"port": 70000})], [
        ("error", "plc.port", "must be at most 65535, got 70000")], id="port too high"),
    pytest.param([("plc", {"address_map": {"lamp": {"table": "relay", "address": 1}}})], [
        ("error", "plc.address_map.lamp.table", ("expected 'coil', 'discrete_input', "
         "'holding_register' or 'input_register'"))], id="unknown modbus table"),
    pytest.param([("plc", {"address_map": {"lamp": {"table": "coil", "address": -1}}})], [
        ("error", "plc.address_map.lamp.address", "must be at least 0, got -1")],
        id="negative address"),
    pytest.param([("plc", {"address_map": {"2lamp": {"table": "coil", "address": 1}}})], [
        ("error", "plc.address_map.2lamp", "'2lamp' is not a usable id: start with a letter")],
        id="bad signal name"),
    pytest.param([("plc", {"address_map": {3: {"table": "coil", "address": 1}}})], [
        ("error", "plc.address_map.3", "the name '3': expected text, got the number 3")],
        id="number as signal name"),
    pytest.param([("log", {"evidence_images": "yes"})], [
        ("error", "log.evidence_images", "expected true or false, got the text 'yes'")],
        id="quoted yes"),
    pytest.param([("log", {"retention_days": 0})], [
        ("error", "log.retention_days", "must be at least 1, got 0")], id="zero retention"),
    pytest.param([("judgements", {"camera_shift": {"tolerance_px": 0}})], [
        ("error", "judgements.camera_shift.tolerance_px", "must be at least 0.5, got 0")],
        id="camera tolerance zero"),
    pytest.param([("judgements", {"bin_activity": {"changed_fraction": 1.5}})], [
        ("error", "judgements.bin_activity.changed_fraction", "must be at most 1, got 1.5")],
        id="bin share above 1"),
    pytest.param([("judgements", {"presence": {"margin": 0.2}})], [
        ("error", "judgements.presence.margin", "did you mean 'min_margin'?")],
        id="misspelt presence margin"),
]


@pytest.mark.parametrize("changes", GOOD)
def test_good_configs_have_no_findings(
    changes: list[tuple[str, Any]], check_changes: Callable[..., CheckResult]
) -> None:
    result = check_changes(changes, with_files=("videos/dry run.mp4", "models/tool.onnx"))
    # a station's own model file that no fitness report has measured is said once
    # (tests/config/test_model_proof.py)
    others = [f for f in result.findings if "UNPROVEN MODEL" not in f.message]
    assert others == [], result.lines()
    assert result.config is not None


@pytest.mark.parametrize(("changes", "expected"), BAD)
def test_bad_configs_report_exactly_these_findings(
    changes: list[tuple[str, Any]],
    expected: list[tuple[str, str, str]],
    check_changes: Callable[..., CheckResult],
    assert_findings: Callable[..., None],
) -> None:
    assert_findings(check_changes(changes), expected)


def test_all_problems_are_reported_together(
    check_changes: Callable[..., CheckResult],
) -> None:
    result = check_changes([
        ("camera.fps", "thirty"),
        ("zones[1].kind", "screws"),
        ("steps[0].zone", "bin_x"),
        ("steps[3].prompt", 5),
    ])
    assert [f.path_text for f in result.errors] == [
        "camera.fps", "zones[1].kind", "steps[0].zone", "steps[3].prompt"]
    assert not result.ok
