"""Files a station config refers to: ``check`` names every missing one and the path it tried."""

from __future__ import annotations

import shutil
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest

from stationcheck.cli import main
from stationcheck.config import CheckResult

REPO_ROOT = Path(__file__).resolve().parents[2]

MISSING: list[Any] = [
    pytest.param(lambda d: (d / "ref.png").unlink(), [], "error", "station.reference_frame",
                 "reference frame 'ref.png' not found: tried {d}/ref.png", id="reference frame"),
    pytest.param(lambda d: None, [("model", {"path": "models/tool.onnx"})], "error", "model.path",
                 "model file 'models/tool.onnx' not found: tried {d}/models/tool.onnx",
                 id="model file"),
    pytest.param(lambda d: None, [("camera.source", "../clips/a.mp4")], "warning",
                 "camera.source", "video file '../clips/a.mp4' not found: tried "
                 "{d.parent}/clips/a.mp4", id="camera video (other commands take --video)"),
    pytest.param(lambda d: (d / "pin" / "references.yaml").write_text(
        "format_version: 1\nimages: [{file: present-001.png, class: present}]\n"),
        [], "error", "zones[3]", "1 taught image(s) listed in {d}/pin/references.yaml not "
        "found: present-001.png", id="taught image"),
    pytest.param(lambda d: (d / "pin" / "references.yaml").write_text("images: 3\n"), [],
                 "error", "zones[3]", "{d}/pin/references.yaml: 'images' must be a list",
                 id="malformed teaching"),
    pytest.param(lambda d: shutil.rmtree(d / "pin"), [], "warning", "zones[3]",
                 "check zone 'pin' is not taught (no {d}/pin/references.yaml)",
                 id="untaught check zone"),
]


@pytest.mark.parametrize(("break_it", "changes", "severity", "path", "message"), MISSING)
def test_a_missing_referenced_file_names_the_path_tried(
    check_changes: Callable[..., CheckResult], tmp_path: Path,
    break_it: Callable[[Path], None], changes: list[tuple[str, Any]], severity: str, path: str,
    message: str,
) -> None:
    break_it(tmp_path)
    result = check_changes(changes)
    assert [(f.severity, f.path_text) for f in result.findings] == [(severity, path)]
    assert message.format(d=tmp_path) in result.findings[0].message
    assert result.ok == (severity == "warning")


def test_check_command_fails_on_a_copied_config_without_its_files(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    """The demo config copied alone into another folder: its reference frame is gone and its
    check zone untaught there."""
    config = tmp_path / "copied.yaml"
    shutil.copy(REPO_ROOT / "configs" / "demo_station.yaml", config)
    assert main(["check", str(config)]) == 1
    out = capsys.readouterr().out.splitlines()
    line_no = next(n for n, text in enumerate(config.read_text().splitlines(), 1)
                   if text.lstrip().startswith("reference_frame:"))
    assert any(line.startswith(f"{config}:{line_no}: error: station.reference_frame: reference frame "
                               f"'demo_station/reference.png' not found: tried "
                               f"{tmp_path}/demo_station/reference.png") for line in out), out
    assert any("warning: zones[8]: check zone 'locking_pin' is not taught" in line
               for line in out), out
    assert out[-1].endswith("NOT usable: 1 error, 2 warnings")
    shutil.copytree(REPO_ROOT / "configs" / "demo_station", tmp_path / "demo_station")
    assert main(["check", str(config)]) == 0  # the video is still missing: a warning
    assert capsys.readouterr().out.splitlines()[-1].endswith(
        "OK with warnings: 0 errors, 1 warning")


@pytest.mark.parametrize(
    ("corner", "warned"),
    [((2.0, 100.0), True), ((610.0, 100.0), True), ((300.0, 452.0), True), ((4.0, 4.0), False)],
)
def test_a_fastener_zone_in_the_pictures_edge_band_is_warned_about(
    check_changes: Callable[..., CheckResult], tmp_path: Path, corner: tuple[float, float],
    warned: bool,
) -> None:
    import cv2
    import numpy as np

    cv2.imwrite(str(tmp_path / "ref.png"), np.zeros((480, 640, 3), np.uint8))
    x, y = corner
    square = [[x, y], [x + 26, y], [x + 26, y + 26], [x, y + 26]]  # 640 - 1 - 4 = 635 is in
    result = check_changes([("zones[0].polygon", square)])
    edge = [f for f in result.findings if "edge" in f.message]
    assert [(f.severity, f.path_text) for f in edge] == ([("warning", "zones[0]")] if warned else [])
    if warned:
        assert "within 4 px of the picture's edge (640 x 480)" in edge[0].message
