"""Comment-keeping edits of the config document (ruamel.yaml round-trip mode)."""

from __future__ import annotations

import copy
import difflib
from pathlib import Path

import pytest
import yaml

from stationcheck.config import check_data
from stationcheck.web.setup import yaml_document
from tests.web.setup.conftest import DEMO_CONFIG


def _demo() -> tuple[str, dict]:  # type: ignore[type-arg]
    text = DEMO_CONFIG.read_text(encoding="utf-8")
    return text, yaml_document.to_plain(yaml_document.load_text(text, "demo"))


def _saved(text: str, data: dict) -> str:  # type: ignore[type-arg]
    document = yaml_document.load_text(text, "demo")
    yaml_document.merge_into(document, data)
    return yaml_document.dump_text(document)


def _changed_lines(before: str, after: str) -> list[str]:
    return [line for line in difflib.ndiff(before.splitlines(), after.splitlines())
            if line.startswith(("- ", "+ "))]


def test_unchanged_data_saves_byte_for_byte() -> None:
    text, data = _demo()
    assert _saved(text, copy.deepcopy(data)) == text


def test_moving_one_zone_changes_only_its_polygon_line() -> None:
    text, data = _demo()
    data["zones"][1]["polygon"][0] = [399.5, 188]
    changed = _changed_lines(text, _saved(text, data))
    assert len(changed) == 2
    assert changed[0].startswith("-     polygon: [[395.9, 188], [385.9, 198]")
    assert changed[1].startswith("+     polygon: [[399.5, 188], [385.9, 198]")


def test_reordered_steps_keep_their_own_comments() -> None:
    text, data = _demo()
    data["steps"].insert(0, data["steps"].pop(2))  # fasten_cover first
    saved = _saved(text, data)
    steps = saved[saved.index("steps:"):saved.index("plc:")]
    assert steps.index("id: fasten_cover") < steps.index("id: take_gasket")
    fasten = steps[steps.index("id: fasten_cover"):steps.index("id: take_gasket")]
    assert "# zones in tightening order" in fasten
    assert "# first try plus one retry" in fasten
    assert yaml.safe_load(saved)["steps"][0]["zones"][:2] == ["screw_1", "screw_4"]


@pytest.mark.parametrize(("edit", "expected_line"), [
    # a new key goes where the schema lists it, not at the end
    (lambda d: d["zones"][6].pop("label"), None),
    (lambda d: d["steps"][2].update(order="cross"), "    order: cross"),
    (lambda d: d["steps"][2].pop("angle_deg"), None),
    (lambda d: d["steps"][3].update(id="pin_in"), "  - id: pin_in"),
])
def test_small_edits_touch_only_their_lines(edit, expected_line) -> None:  # type: ignore[no-untyped-def]
    text, data = _demo()
    edit(data)
    changed = _changed_lines(text, _saved(text, data))
    assert 1 <= len(changed) <= 2
    if expected_line is not None:
        assert f"+ {expected_line}" in changed


def test_new_key_lands_in_schema_order() -> None:
    text, data = _demo()
    data["steps"][2].update(order="cross")
    saved = _saved(text, data).splitlines()
    start = saved.index("  - id: fasten_cover")
    assert saved[start + 4].startswith("    zones: [")
    assert saved[start + 5] == "    order: cross"  # after zones, before max_attempts


def test_new_document_reads_well_and_checks(tmp_path: Path) -> None:
    document = yaml_document.new_document("station/reference.png")
    data = yaml_document.to_plain(document)
    data["zones"] = [{"polygon": [[10, 10], [60, 10], [60, 60], [10, 60]], "kind": "bin",
                      "id": "bin_a"}]
    data["steps"] = [{"zone": "bin_a", "kind": "pick", "id": "take"}]
    yaml_document.merge_into(document, data)
    text = yaml_document.dump_text(document)
    assert text.startswith("# stationcheck station config")
    assert "  - id: bin_a\n    kind: bin\n    polygon: [[10, 10], [60, 10], [60, 60], [10, 60]]" \
        in text
    assert "  - id: take\n    kind: pick\n    zone: bin_a" in text
    result = check_data(yaml.safe_load(text), base_dir=tmp_path)
    assert [f.message for f in result.errors if "reference" not in f.message] == []
