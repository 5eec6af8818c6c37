"""Lint rows: geometry and cross-references, each change and exactly what it must report.

Base config (test data): fastener zones screw_a (100..130 px square) and screw_b (200..230),
bin zone bin_a (400..500, 300..400), check zone pin (50..90, 400..440), a 640x480 frame,
hysteresis_px 4, 30 fps.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest

from stationcheck.config import CheckResult

DELETE = "<delete>"


def sq(x0: float, y0: float, size: float) -> list[list[float]]:
    return [[x0, y0], [x0 + size, y0], [x0 + size, y0 + size], [x0, y0 + size]]


CIRCLE = {"id_prefix": "bolt_", "centre_px": [320, 240], "radius_px": 100, "count": 8,
          "zone_size_px": 30}
ALL_BOLTS = [f"bolt_{n}" for n in range(1, 9)]

GEOMETRY: list[Any] = [
    pytest.param([("zones[2].polygon", sq(540, 380, 100))], [], id="zone on the frame edge"),
    pytest.param([("zones[2].polygon", sq(90, 90, 100))], [],
                 id="bin over a fastener (different kinds)"),
    pytest.param([("zones[3].polygon", sq(110, 110, 40))], [],
                 id="check zone over a fastener"),
    pytest.param([("zones[0].polygon", sq(100, 100, 17))], [],
                 id="inscribed radius above twice the hysteresis"),
    pytest.param([("thresholds.hysteresis_px", 0), ("zones[0].polygon", sq(100, 100, 2))], [
        ("warning", "thresholds.hysteresis_px", "0 px is below the usual 1 px")],
        id="no hysteresis, tiny zone"),
    pytest.param([("zones[0].polygon", [[100, 100], [130, 130], [130, 100], [100, 130]])], [
        ("error", "zones[0].polygon", ("zone 'screw_a' has an outline that crosses itself near "
         "(115, 115); list the points in order around the zone"))], id="bow tie"),
    pytest.param([("zones[0].polygon", [[100, 100], [130, 100], [100, 100], [130, 100]])], [
        ("error", "zones[0].polygon", ("zone 'screw_a' has 2 distinct points; a zone needs at "
         "least 3"))], id="repeated points"),
    pytest.param([("zones[0].polygon", [[100, 100], [110, 100], [130, 100]])], [
        ("error", "zones[0].polygon", ("zone 'screw_a' has no area: all its points lie on one "
         "line"))], id="points on a line"),
    pytest.param([("zones[0].polygon", sq(700, 100, 30))], [
        ("error", "zones[0]", ("zone 'screw_a' lies entirely outside the 640x480 px camera "
         "frame"))], id="outside the frame"),
    pytest.param([("zones[2].polygon", sq(600, 300, 100))], [
        ("warning", "zones[2]", ("zone 'bin_a' reaches outside the 640x480 px camera frame (60% "
         "of its area)"))], id="partly outside the frame"),
    pytest.param([("zones[3].polygon", sq(-20, 400, 40))], [
        ("warning", "zones[3]", "(50% of its area)")], id="negative coordinates"),
    pytest.param([("zones[1].polygon", sq(120, 100, 30))], [
        ("error", "zones[1]", "zone 'screw_b' overlaps fastener zone 'screw_a' by 300 px²")],
        id="fastener zones overlap"),
    pytest.param([("zones[1].polygon", sq(130, 100, 30))], [
        ("warning", "zones[1]", ("zone 'screw_b' is only 0.0 px from fastener zone 'screw_a', "
         "less than hysteresis_px (4)"))], id="fastener zones touch"),
    pytest.param([("zones[1].polygon", sq(132, 100, 30))], [
        ("warning", "zones[1]", "is only 2.0 px from fastener zone 'screw_a'")],
        id="fastener zones closer than the hysteresis"),
    pytest.param([("zones[1].polygon", sq(134, 100, 30))], [],
                 id="fastener zones as far apart as the hysteresis"),
    pytest.param([("zones[4]", {"id": "bin_b", "kind": "bin", "polygon": sq(450, 300, 100)}),
                  ("steps[4]", {"id": "pick_b", "kind": "pick", "zone": "bin_b"})], [
        ("warning", "zones[4]", ("zone 'bin_b' overlaps bin zone 'bin_a' by 5000 px²; a reach "
         "into the overlap counts as a pick from both bins"))], id="bins overlap"),
    pytest.param([("zones[0].polygon", sq(100, 100, 8))], [
        ("error", "zones[0]", ("zone 'screw_a' is too small for the hysteresis (inscribed radius "
         "4.0 px, hysteresis_px 4)"))], id="zone too small for the hysteresis"),
    pytest.param([("zones[0].polygon", sq(100, 100, 14))], [
        ("warning", "zones[0]", ("zone 'screw_a' is small for the hysteresis (inscribed radius "
         "7.0 px, hysteresis_px 4)"))], id="zone small for the hysteresis"),
    pytest.param([("zones[4]", {"bolt_circle": {**CIRCLE, "radius_px": 40,
                                                "centre_px": [320, 300], "zone_size_px": 40}}),
                  ("steps[4]", {"id": "flange", "kind": "fasten", "zones": ALL_BOLTS})], [
        ("error", "zones[4].bolt_circle", "zone 'bolt_2' overlaps fastener zone 'bolt_1'")],
        id="bolt circle zones overlap"),
    pytest.param([("zones[4]", {"bolt_circle": {**CIRCLE, "zone_size_px": 10}}),
                  ("steps[4]", {"id": "flange", "kind": "fasten", "zones": ALL_BOLTS})], [
        ("warning", "zones[4].bolt_circle", ("zones bolt_1 to bolt_8 are small for the "
         "hysteresis (inscribed radius 5.0 px"))], id="bolt circle zones small"),
]

REFERENCES: list[Any] = [
    pytest.param([("zones[1].id", "screw_a")], [
        ("error", "zones[1].id", ("zone id 'screw_a' is already used by zones[0].id; ids must be "
         "unique")),
        ("error", "steps[1].zones[1]", ("no zone named 'screw_b' (did you mean 'screw_a'?); "
         "fastener zones are: screw_a"))], id="duplicate zone id"),
    pytest.param([("zones[0].id", "bolt_1"), ("steps[1].zones[0]", "bolt_1"),
                  ("zones[4]", {"bolt_circle": CIRCLE}),
                  ("steps[4]", {"id": "flange", "kind": "fasten", "zones": ALL_BOLTS})], [
        ("error", "zones[4].bolt_circle.id_prefix", ("zone id 'bolt_1' is already used by "
         "zones[0].id"))], id="bolt circle id clash"),
    pytest.param([("steps[2].id", "pick_a")], [
        ("error", "steps[2].id", "step id 'pick_a' is already used by steps[0].id")],
        id="duplicate step id"),
    pytest.param([("steps[0].zone", "bin_b")], [
        ("error", "steps[0].zone", ("no zone named 'bin_b' (did you mean 'bin_a'?); bin zones "
         "are: bin_a")),
        ("warning", "zones[2]", "zone 'bin_a' is not used by any step")], id="unknown zone"),
    pytest.param([("zones[2]", DELETE)], [
        ("error", "steps[0].zone", "no zone named 'bin_a'; there are no bin zones")],
        id="no zones of the kind"),
    pytest.param([("steps[0].zone", "pin")], [
        ("error", "steps[0].zone", ("'pin' is a check zone, but a pick step needs a bin zone; bin "
         "zones are: bin_a")),
        ("warning", "zones[2]", "zone 'bin_a' is not used")], id="pick from a check zone"),
    pytest.param([("steps[1].zones[2]", "bin_a")], [
        ("error", "steps[1].zones[2]", ("'bin_a' is a bin zone, but a fasten step needs a "
         "fastener zone; fastener zones are: screw_a, screw_b"))], id="fasten a bin"),
    pytest.param([("steps[2].zone", "screw_a")], [
        ("error", "steps[2].zone", ("'screw_a' is a fastener zone, but a check step needs a "
         "check zone; check zones are: pin")),
        ("warning", "zones[3]", "zone 'pin' is not used")], id="check a fastener zone"),
    pytest.param([("steps[1].zones[2]", "screw_a")], [
        ("error", "steps[1].zones[2]", ("'screw_a' is already listed in this step at "
         "steps[1].zones[0]"))], id="fastener listed twice"),
    pytest.param([("zones[4]", {"id": "bin_spare", "kind": "bin", "polygon": sq(550, 50, 50)})], [
        ("warning", "zones[4]", "zone 'bin_spare' is not used by any step")], id="unused zone"),
    pytest.param([("zones[2].kind", "tray")], [
        ("error", "zones[2].kind", "expected 'fastener', 'bin' or 'check', got the text 'tray'")],
        id="zone with a bad kind is not blamed on its step"),
    pytest.param([("zones[2].polygon", "big")], [
        ("error", "zones[2].polygon", "expected a list")],
        id="zone with bad points is still known to its step"),
    pytest.param([("thresholds.stale_frame_ms", 30)], [
        ("error", "thresholds.stale_frame_ms", ("30 ms is not longer than one frame (one frame at "
         "30 fps is 33.3 ms); every frame would count as stale")),
        ("warning", "thresholds.stale_frame_ms", "30 ms is below the usual 60 ms")],
        id="stale within a frame"),
    pytest.param([("thresholds.dwell_ms", 20), ("thresholds.lost_track_grace_ms", 10)], [
        ("warning", "thresholds.dwell_ms", "20 ms is shorter than one frame"),
        ("warning", "thresholds.lost_track_grace_ms", "10 ms is shorter than one frame")],
        id="timing below a frame"),
    pytest.param([("thresholds.dwell_ms", 0)], [
        ("warning", "thresholds.dwell_ms", "0 ms is below the usual 100 ms: a tip passing")],
        id="no dwell"),
    pytest.param([("camera.fps", 5), ("thresholds.stale_frame_ms", 250)], [
        ("warning", "thresholds.stale_frame_ms", "250 ms is above the usual 200 ms")],
        id="slow camera, dwell of one frame"),
    pytest.param([("thresholds.stale_frame_ms", 30), ("thresholds.typo", 1)], [
        ("error", "thresholds.typo", "unknown key 'typo'"),
        ("error", "thresholds.stale_frame_ms", "is not longer than one frame"),
        ("warning", "thresholds.stale_frame_ms", "is below the usual")],
        id="section with a schema error is still linted"),
    # the same check as run's (stationcheck.plc.address_map.address_map_findings)
    pytest.param([("plc.address_map", {
        "heartbeat": {"table": "holding_register", "address": 40},
        "step_number": {"table": "holding_register", "address": 40}})], [
        ("error", "plc.address_map.step_number.address", ("holding_register 40 is taken by both "
         "step_number and heartbeat; each signal needs its own addresses"))],
        id="overlapping registers"),
    pytest.param([("plc.address_map", {
        "step_number": {"table": "holding_register", "address": 0}})], [
        ("error", "plc.address_map.step_number.address", ("holding_register 0 is taken by both "
         "step_number and heartbeat"))], id="overlaps a signal left at its default"),
    pytest.param([("plc.address_map", {
        "reset": {"table": "coil", "address": 0}, "lamp": {"table": "coil", "address": 5},
        "bad": {"table": "relay", "address": 0}})], [
        ("error", "plc.address_map.lamp", "unknown signal"),
        ("error", "plc.address_map.reset.address", "coil 0 is taken by both reset and tool_enable"),
        ("error", "plc.address_map.bad.table", "expected 'coil'")], id="same coil twice"),
    pytest.param([("plc.address_map", {
        "serial": {"table": "input_register", "address": 65530}})], [
        ("error", "plc.address_map.serial.address", ("must be 0..65526 (10 addresses from "
         "there), got 65530"))], id="past the last address"),
]


@pytest.mark.parametrize(("changes", "expected"), GEOMETRY + REFERENCES)
def test_lint_reports_exactly_these_findings(
    changes: list[tuple[str, Any]],
    expected: list[tuple[str, str, str]],
    check_changes: Callable[..., CheckResult],
    assert_findings: Callable[..., None],
) -> None:
    assert_findings(check_changes(changes), expected)
