"""Factories for station config tests: a small valid config and ways to change it.

Table rows describe a change as data: a list of ``(path, value)`` pairs, paths written the way
findings print them (``steps[1].zones``); the value ``DELETE`` removes the key.
"""

from __future__ import annotations

import copy
import re
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import pytest
import yaml

from stationcheck.config import CheckResult, check_data

REPO_ROOT = Path(__file__).resolve().parents[2]
DELETE = "<delete>"

Changes = Sequence[tuple[str, Any]]
Expected = Sequence[tuple[str, str, str]]  # severity, path, message fragment


def _square(x0: float, y0: float, size: float) -> list[list[float]]:
    return [[x0, y0], [x0 + size, y0], [x0 + size, y0 + size], [x0, y0 + size]]


def _base_config() -> dict[str, Any]:
    """A valid station (test data) with one zone of each kind and one step of each kind."""
    return {
        "format_version": 1,
        "station": {"name": "Test station (demo data)", "reference_frame": "ref.png"},
        "camera": {"source": 0, "width_px": 640, "height_px": 480, "fps": 30},
        "thresholds": {"dwell_ms": 200, "lost_track_grace_ms": 300, "hysteresis_px": 4,
                       "stale_frame_ms": 100},
        "zones": [
            {"id": "screw_a", "kind": "fastener", "polygon": _square(100, 100, 30)},
            {"id": "screw_b", "kind": "fastener", "polygon": _square(200, 100, 30)},
            {"id": "bin_a", "kind": "bin", "label": "bin A", "polygon": _square(400, 300, 100)},
            {"id": "pin", "kind": "check", "polygon": _square(50, 400, 40)},
        ],
        "steps": [
            {"id": "pick_a", "kind": "pick", "zone": "bin_a"},
            {"id": "fasten", "kind": "fasten", "zones": ["screw_a", "screw_b"]},
            {"id": "pin_in", "kind": "check", "zone": "pin"},
            {"id": "done", "kind": "confirm", "prompt": "Press OK when the label is on"},
        ],
    }


_PART = re.compile(r"([^.\[\]]+)|\[(\d+)\]")


def _walk_to_parent(data: Any, path: str) -> tuple[Any, str | int]:
    parts: list[str | int] = [name if name else int(index) for name, index in _PART.findall(path)]
    target = data
    for part in parts[:-1]:
        target = target.setdefault(part, {}) if isinstance(part, str) else target[part]
    return target, parts[-1]


def apply_changes(data: dict[str, Any], changes: Changes) -> dict[str, Any]:
    for path, value in changes:
        target, last = _walk_to_parent(data, path)
        if value == DELETE:
            del target[last]
        elif isinstance(last, int) and last == len(target):
            target.append(copy.deepcopy(value))
        else:
            target[last] = copy.deepcopy(value)
    return data


@pytest.fixture
def square() -> Callable[[float, float, float], list[list[float]]]:
    return _square


@pytest.fixture
def base_config() -> Callable[[], dict[str, Any]]:
    return _base_config


def write_station_files(folder: Path) -> None:
    """The files the base config refers to: its reference frame and the check zone's taught
    references (an empty list of images is enough for the file checks)."""
    (folder / "ref.png").write_bytes(b"not read by the checks")
    (folder / "pin").mkdir(exist_ok=True)
    (folder / "pin" / "references.yaml").write_text(
        "format_version: 1\nzone: pin\nzone_box_px: [50, 400, 90, 440]\n"
        "crop_box_px: [34, 384, 106, 456]\nimages: []\n", encoding="utf-8")


@pytest.fixture
def check_changes(tmp_path: Path) -> Callable[[Changes], CheckResult]:
    """Check the base config after ``changes``."""
    write_station_files(tmp_path)

    def run(changes: Changes, with_files: Sequence[str] = ()) -> CheckResult:
        for name in with_files:  # more files the changes refer to
            (tmp_path / name).parent.mkdir(parents=True, exist_ok=True)
            (tmp_path / name).write_bytes(b"checked for being there, not read")
        data = apply_changes(_base_config(), changes)
        return check_data(data, base_dir=tmp_path, source="test.yaml")

    return run


def findings_of(result: CheckResult) -> set[tuple[str, str]]:
    return {(f.severity, f.path_text) for f in result.findings}


@pytest.fixture
def assert_findings() -> Callable[[CheckResult, Expected], None]:
    """Exactly these (severity, path) findings, each message containing its fragment."""

    def check(result: CheckResult, expected: Expected) -> None:
        assert findings_of(result) == {(sev, path) for sev, path, _ in expected}, result.lines()
        for severity, path, fragment in expected:
            messages = [f.message for f in result.findings
                        if f.severity == severity and f.path_text == path]
            assert any(fragment in m for m in messages), (fragment, messages)
        assert result.ok == (not any(sev == "error" for sev, _, _ in expected))
        assert (result.config is None) == (not result.ok)

    return check


@pytest.fixture
def write_yaml(tmp_path: Path) -> Callable[..., Path]:
    """Write text (or data as YAML) to a file in ``tmp_path`` (beside the files the base
    config refers to) and return its path."""
    write_station_files(tmp_path)

    def write(content: str | dict[str, Any], name: str = "station.yaml") -> Path:
        path = tmp_path / name
        text = content if isinstance(content, str) else yaml.safe_dump(content, sort_keys=False)
        path.write_text(text, encoding="utf-8")
        return path

    return write


@pytest.fixture
def demo_config_path() -> Path:
    return REPO_ROOT / "configs" / "demo_station.yaml"
