"""Taught references on disk: the manifest, the crops, listing, clearing, and what is refused."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import cv2
import numpy as np
import pytest
import yaml

from stationcheck.config.judgement_settings import PresenceSettings
from stationcheck.config.schema import StationConfig
from stationcheck.core.plan import ZoneSpec
from stationcheck.errors import ConfigError, InputFileError
from stationcheck.judgements import teaching
from stationcheck.judgements.presence import PresenceJudge
from tests.judgements.conftest import FPS, Render


def frames(render: Render, engaged: bool, count: int, seed: int) -> list[tuple[np.ndarray, str]]:
    return [(render(engaged, gain=0.9 + 0.05 * k, seed=seed + k), f"render {seed + k}")
            for k in range(count)]


TeachPin = Callable[..., tuple[Path, ZoneSpec]]


@pytest.fixture
def teach_pin(tmp_path: Path, render: Render, zone_by_id: dict[str, ZoneSpec]) -> TeachPin:
    """``teach_pin(present, absent, pulled_as_present=0)`` into ``tmp_path/pin``."""
    zone = zone_by_id["locking_pin"]
    folder = tmp_path / "pin"

    def teach(present: int, absent: int, pulled_as_present: int = 0) -> tuple[Path, ZoneSpec]:
        shown = frames(render, True, present, 30) + frames(render, False, pulled_as_present, 99)
        if shown:
            teaching.teach(folder, zone, "present", shown)
        if absent:
            teaching.teach(folder, zone, "absent", frames(render, False, absent, 40))
        return folder, zone

    return teach


def test_teaching_writes_crops_and_an_open_manifest(
    tmp_path: Path, render: Render, zone_by_id: dict[str, ZoneSpec]
) -> None:
    zone = zone_by_id["locking_pin"]
    folder = tmp_path / "locking_pin"
    teaching.teach(folder, zone, "present", frames(render, True, 2, 10), (640, 480))
    manifest = teaching.teach(folder, zone, "absent", frames(render, False, 3, 20), (640, 480))
    assert sorted(p.name for p in folder.iterdir()) == [
        "absent-001.png", "absent-002.png", "absent-003.png", "present-001.png",
        "present-002.png", "references.yaml"]
    data = yaml.safe_load((folder / "references.yaml").read_text())
    assert data["zone"] == "locking_pin" and data["format_version"] == 1
    assert data["zone_box_px"] == [418, 318, 470, 350]
    assert data["crop_box_px"] == [402, 302, 486, 366]
    assert [(i["file"], i["class"]) for i in data["images"]][:3] == [
        ("present-001.png", "present"), ("present-002.png", "present"),
        ("absent-001.png", "absent")]
    crop = cv2.imread(str(folder / "present-001.png"))
    assert crop.shape == (64, 84, 3)
    assert manifest.count("present") == 2 and manifest.count("absent") == 3
    assert teaching.read_manifest(folder) == manifest


def test_loaded_references_judge_like_the_images_they_came_from(
    teach_pin: TeachPin, render: Render
) -> None:
    folder, zone = teach_pin(3, 3)
    taught = teaching.load_taught(folder, zone)
    assert taught is not None and taught.complete
    judge = PresenceJudge(zone.id, zone.polygon_px, (640, 480), taught, PresenceSettings())
    for k in range(6):
        judge.decide(k / FPS, judge.score(render(False, seed=50 + k)))
    assert judge.verdict == "absent"
    found = teaching.separation(taught)
    assert found is not None and found.misfits == () and found.gap > 0.8


def test_a_mislabelled_image_shows_up_as_a_misfit(teach_pin: TeachPin) -> None:
    folder, zone = teach_pin(3, 3, pulled_as_present=1)
    taught = teaching.load_taught(folder, zone)
    assert taught is not None
    found = teaching.separation(taught)
    assert found is not None and found.misfits == (3,)


def test_clearing_one_class_keeps_the_other(teach_pin: TeachPin, tmp_path: Path) -> None:
    folder, zone = teach_pin(2, 2)
    (folder / "notes.txt").write_text("the engineer's own file")
    assert teaching.clear(folder, "absent") == 2
    manifest = teaching.read_manifest(folder)
    assert manifest is not None and manifest.count("absent") == 0
    assert manifest.count("present") == 2
    taught = teaching.load_taught(folder, zone)
    assert taught is not None and not taught.complete
    assert teaching.clear(folder) == 2
    assert sorted(p.name for p in folder.iterdir()) == ["notes.txt"]
    assert teaching.read_manifest(folder) is None
    assert teaching.clear(tmp_path / "never") == 0


def test_numbers_start_again_after_clearing_a_class(teach_pin: TeachPin, render: Render) -> None:
    folder, zone = teach_pin(2, 0)
    teaching.clear(folder, "present")
    manifest = teaching.teach(folder, zone, "present", frames(render, True, 1, 60))
    assert [i.file for i in manifest.images] == ["present-001.png"]


def test_a_zone_changed_since_teaching_is_refused(teach_pin: TeachPin, render: Render) -> None:
    folder, zone = teach_pin(1, 0)
    wider = ZoneSpec(zone.id, "check", ((418, 318), (480, 318), (480, 350), (418, 350)))
    with pytest.raises(ConfigError, match="clear its references first"):
        teaching.teach(folder, wider, "absent", frames(render, False, 1, 40))


@pytest.mark.parametrize(("text", "message"), [
    ("format_version: 2\nzone: locking_pin\n", "format_version must be 1"),
    ("- a\n- b\n", "expected a mapping"),
    ("format_version: 1\nzone: locking_pin\nzone_box_px: [1, 2, 3]\ncrop_box_px: [0, 0, 9, 9]\n",
     "malformed"),
    ("format_version: 1\nzone: locking_pin\nzone_box_px: [5, 5, 1, 9]\ncrop_box_px: [0, 0, 9, 9]\n",
     "x1 > x0"),
    (("format_version: 1\nzone: locking_pin\nzone_box_px: [1, 1, 5, 5]\n"
      "crop_box_px: [0, 0, 9, 9]\nimages: [{file: a.png, class: maybe}]\n"),
     "'present' or 'absent'"),
    ("zone: [1, 2\n", "not valid YAML"),
])
def test_a_broken_manifest_is_a_config_error(tmp_path: Path, text: str, message: str) -> None:
    (tmp_path / "references.yaml").write_text(text)
    with pytest.raises(ConfigError, match=message):
        teaching.read_manifest(tmp_path)


def test_a_missing_image_or_another_zones_manifest_is_a_config_error(
    teach_pin: TeachPin
) -> None:
    folder, zone = teach_pin(1, 0)
    other = ZoneSpec("fixture_clamp", "check", zone.polygon_px)
    with pytest.raises(ConfigError, match="taught for zone 'locking_pin'"):
        teaching.load_taught(folder, other)
    (folder / "present-001.png").unlink()
    with pytest.raises(ConfigError, match="missing or unreadable"):
        teaching.load_taught(folder, zone)


def test_frames_of_another_size_are_refused(
    tmp_path: Path, zone_by_id: dict[str, ZoneSpec]
) -> None:
    small = np.zeros((240, 320, 3), np.uint8)
    with pytest.raises(InputFileError, match="320x240"):
        teaching.teach(tmp_path, zone_by_id["locking_pin"], "present", [(small, "x")], (640, 480))


@pytest.mark.parametrize(("zone_id", "message"), [
    ("pin", "no zone named 'pin'; check zones: locking_pin"),
    ("bin_cover", "'bin_cover' is a bin zone, not a check zone"),
])
def test_only_check_zones_can_be_taught(demo_config: StationConfig, zone_id: str,
                                        message: str) -> None:
    with pytest.raises(ConfigError, match=message):
        teaching.check_zone(demo_config, zone_id)


def test_the_demo_pin_is_taught_in_the_folder_of_the_reference_frame(
    demo_config: StationConfig
) -> None:
    folder = teaching.teaching_dir(demo_config, "locking_pin")
    assert folder == demo_config.reference_frame_path.parent / "locking_pin"
    manifest = teaching.read_manifest(folder)
    assert manifest is not None
    assert manifest.count("present") >= 4 and manifest.count("absent") >= 4
    taught = teaching.load_taught(folder, teaching.check_zone(demo_config, "locking_pin"))
    assert taught is not None
    found = teaching.separation(taught)
    assert found is not None and found.misfits == () and found.gap > 0.5
    zones = teaching.taught_zones(demo_config)
    assert [(zone.id, m is not None) for zone, m in zones] == [("locking_pin", True)]
