"""Re-mapped zones as YAML and as a new config file that keeps the engineer's text."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from stationcheck.config import check_file, load_config
from stationcheck.config.yaml_text import load_plain
from stationcheck.core.plan import ZoneSpec
from stationcheck.errors import ConfigError
from stationcheck.judgements.camera_shift import apply_matrix, remap_zones
from stationcheck.judgements.zone_remap import (
    rewrite_config_text,
    write_remapped_config,
    zones_yaml,
)
from tests.judgements.conftest import DEMO_CONFIG

SHIFT = np.array([[1.0, 0.0, 10.0], [0.0, 1.0, -7.0]])


def test_zones_yaml_reads_back_as_the_same_zones(demo_zones: list[ZoneSpec]) -> None:
    moved = remap_zones(demo_zones, SHIFT)
    data = load_plain(zones_yaml(moved, note="moved by a test\nsecond line"), "zones")
    assert [z["id"] for z in data["zones"]] == [z.id for z in demo_zones]
    for written, zone in zip(data["zones"], moved, strict=True):
        assert written["kind"] == zone.kind and written.get("label", "") == zone.label
        assert [tuple(p) for p in written["polygon"]] == [tuple(p) for p in zone.polygon_px]


@pytest.mark.parametrize("label", ["plain", "with: colon", "yes", "#hash", "it's"])
def test_labels_that_need_quoting_survive(label: str) -> None:
    zone = ZoneSpec("z", "bin", ((0.0, 0.0), (1.0, 0.0), (1.0, 1.0)), label)
    assert load_plain(zones_yaml([zone]), "zones")["zones"][0]["label"] == label


def test_the_new_config_keeps_everything_but_zones_and_reference(tmp_path: Path) -> None:
    source_text = DEMO_CONFIG.read_text()
    config = load_config(DEMO_CONFIG)
    moved = remap_zones(config.zone_specs(), SHIFT)
    target = tmp_path / "moved.yaml"
    reference = tmp_path / "moved-reference.png"
    reference.write_bytes(b"")  # the file's content does not matter to the check
    write_remapped_config(DEMO_CONFIG, target, moved, reference, note="test move")
    new_text = target.read_text()
    assert check_file(target).ok
    new_config = load_config(target)
    for before, after in zip(config.zone_specs(), new_config.zone_specs(), strict=True):
        expected = apply_matrix(SHIFT, before.polygon_px)
        assert np.allclose(after.polygon_px, expected, atol=0.051)
    assert new_config.station.reference_frame == "moved-reference.png"
    assert new_config.steps == config.steps and new_config.plc == config.plc
    kept = [line for line in source_text.splitlines() if line.startswith("#")]
    assert all(line in new_text for line in kept)  # the comments before and after stay
    assert "# test move" in new_text


@pytest.mark.parametrize(("text", "message"), [
    ("station:\n  reference_frame: a.png\n", "no top-level 'zones:'"),
    ("zones:\n  - id: a\n", "no 'reference_frame:'"),
])
def test_rewriting_needs_both_places(text: str, message: str) -> None:
    with pytest.raises(ConfigError, match=message):
        rewrite_config_text(text, "zones: []\n", "b.png")


def test_rewriting_keeps_the_reference_lines_comment() -> None:
    text = ("station:\n  name: x\n  reference_frame: old.png  # the empty station\n"
            "zones:\n  - id: a\n    kind: bin\n\n# steps follow\nsteps: []\n")
    new = rewrite_config_text(text, "zones: []\n", "new.png")
    assert "  reference_frame: new.png  # the empty station\n" in new
    assert new.endswith("zones: []\n\n# steps follow\nsteps: []\n")
