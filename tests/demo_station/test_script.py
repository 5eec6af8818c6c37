"""Scene script validation: every problem reported with its place in the file."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import pytest

from stationcheck.demo_station.script import Limits, Pick, Tighten, Visit, parse_script
from stationcheck.errors import ConfigError

ScriptDoc = Callable[..., dict[str, Any]]

LIMITS = Limits((4.5, 5.5), (15.0, 45.0), tuple(f"screw_{i}" for i in range(1, 7)))


def test_a_clean_unit_parses(script_doc: ScriptDoc) -> None:
    script = parse_script(script_doc(), LIMITS)
    (unit,) = script.units
    assert unit.picks == (Pick("bin_gasket"), Pick("bin_cover"))
    assert unit.fasten[0] == Tighten("screw_1", True, 5.0, 30.0)
    assert script.seed == 3


def test_reach_and_visit_entries(script_doc: ScriptDoc) -> None:
    doc = script_doc(picks=[{"reach": "bin_cover"}, "bin_gasket"], fasten=[{"visit": "screw_2"}])
    unit = parse_script(doc, LIMITS).units[0]
    assert unit.picks[0] == Pick("bin_cover", take=False)
    assert unit.fasten == (Visit("screw_2", 0.8),)


@pytest.mark.parametrize(
    ("unit", "message"),
    [
        (
            {"fasten": [{"tighten": "screw_9", "ok": True, "torque_nm": 5.0, "angle_deg": 30}]},
            "units[0].fasten[0].tighten: unknown fastener zone 'screw_9'",
        ),
        (
            {"fasten": [{"tighten": "screw_1", "ok": True, "torque_nm": 3.9, "angle_deg": 30}]},
            "units[0].fasten[0]: ok=True disagrees with the limits",
        ),
        (
            {"fasten": [{"tighten": "screw_1", "ok": False, "torque_nm": 5.0, "angle_deg": 30}]},
            "units[0].fasten[0]: ok=False disagrees with the limits",
        ),
        ({"picks": ["bin_nowhere"]}, "units[0].picks[0]: expected one of"),
        ({"pin": "maybe"}, "units[0].pin: expected push, leave_out, keep or none"),
        ({"rework": True}, "units[0].rework: serial PC-000900 has no earlier pass"),
        ({"colour": "red"}, "units[0]: unknown keys ['colour']"),
        ({"fasten": [{"jump": 1}]}, "units[0].fasten[0]: expected tighten, visit"),
    ],
)
def test_bad_units_are_reported_with_their_place(
    script_doc: ScriptDoc, unit: dict[str, Any], message: str
) -> None:
    with pytest.raises(ConfigError, match=None) as info:
        parse_script(script_doc(**unit), LIMITS, "demo_script.yaml")
    assert message in str(info.value)
    assert str(info.value).startswith("demo_script.yaml: ")


def test_all_problems_come_together(script_doc: ScriptDoc) -> None:
    doc = script_doc(pin="maybe", picks=["bin_nowhere"])
    doc["format_version"] = 2
    with pytest.raises(ConfigError) as info:
        parse_script(doc, LIMITS)
    text = str(info.value)
    assert "format_version" in text and "units[0].pin" in text and "units[0].picks[0]" in text


def test_a_repeated_serial_must_be_a_rework_pass(script_doc: ScriptDoc) -> None:
    doc = script_doc()
    doc["units"].append(dict(doc["units"][0]))
    with pytest.raises(ConfigError, match=r"units\[1\].serial: PC-000900 repeats"):
        parse_script(doc, LIMITS)
    doc["units"][1]["rework"] = True
    assert parse_script(doc, LIMITS).units[1].rework
