"""``stationcheck check``: output format, exit codes, --json and --expand."""

from __future__ import annotations

import json
import re
import subprocess
import sys
from collections.abc import Callable
from pathlib import Path
from typing import Any

import pytest
import yaml

from stationcheck.cli import EXIT_USAGE, main
from stationcheck.config import check_data

LINE = re.compile(r"^(?P<file>[^:]+):(?P<line>\d+): (?P<severity>error|warning): "
                  r"(?P<path>[^ ]+): (?P<message>.+)$")
REPO_ROOT = Path(__file__).resolve().parents[2]
CIRCLE = {"id_prefix": "bolt_", "label_prefix": "flange bolt", "centre_px": [320, 260],
          "radius_px": 120, "count": 8, "zone_size_px": 30}


def run_check(args: list[str], capsys: pytest.CaptureFixture[str]) -> tuple[int, str, str]:
    code = main(["check", *args])
    out, err = capsys.readouterr()
    return code, out, err


def circle_config(base: dict[str, Any]) -> dict[str, Any]:
    base["zones"].append({"bolt_circle": CIRCLE})
    base["steps"].append({"id": "flange", "kind": "fasten", "order": "cross",
                          "zones": [f"bolt_{n}" for n in range(1, 9)]})
    return base


def test_demo_config_exits_0(
    capsys: pytest.CaptureFixture[str], monkeypatch: pytest.MonkeyPatch
) -> None:
    monkeypatch.chdir(REPO_ROOT)
    code, out, err = run_check(["configs/demo_station.yaml"], capsys)
    assert (code, err) == (0, "")
    assert out == "configs/demo_station.yaml: OK, no errors or warnings (9 zones, 4 steps)\n"


def test_errors_exit_1_with_one_line_per_finding(
    write_yaml: Callable[..., Path], base_config: Callable[[], dict[str, Any]],
    capsys: pytest.CaptureFixture[str],
) -> None:
    data = base_config()
    data["steps"][0]["zone"] = "bin_b"
    data["camera"]["fps"] = "fast"
    path = write_yaml(data)
    code, out, err = run_check([str(path)], capsys)
    lines = out.splitlines()
    assert (code, err) == (1, "")
    parsed = [LINE.match(line) for line in lines[:-1]]
    assert all(parsed), lines
    assert [(m["severity"], m["path"]) for m in parsed if m] == [
        ("error", "camera.fps"), ("warning", "zones[2]"), ("error", "steps[0].zone")]
    assert {m["file"] for m in parsed if m} == {str(path)}
    assert lines[-1] == f"{path}: NOT usable: 2 errors, 1 warning"


def test_warnings_alone_exit_0(
    write_yaml: Callable[..., Path], base_config: Callable[[], dict[str, Any]],
    capsys: pytest.CaptureFixture[str],
) -> None:
    data = base_config()
    data["thresholds"]["dwell_ms"] = 10
    path = write_yaml(data)
    code, out, _ = run_check([str(path)], capsys)
    assert code == 0
    assert out.splitlines()[-1] == f"{path}: OK with warnings: 0 errors, 2 warnings"


@pytest.mark.parametrize(
    ("content", "fragment"),
    [(None, "no such file"), ("a: [1\n", "not valid YAML"), ("", "the file is empty")],
)
def test_unreadable_files_exit_2_with_one_line_on_stderr(
    tmp_path: Path, capsys: pytest.CaptureFixture[str], content: str | None, fragment: str
) -> None:
    path = tmp_path / "station.yaml"
    if content is not None:
        path.write_text(content, encoding="utf-8")
    code, out, err = run_check([str(path)], capsys)
    assert (code, out) == (2, "")
    assert err.startswith(f"stationcheck check: error: {path}")
    assert fragment in err
    assert err.count("\n") == 1 and "Traceback" not in err


def test_json_output(
    write_yaml: Callable[..., Path], base_config: Callable[[], dict[str, Any]],
    capsys: pytest.CaptureFixture[str], tmp_path: Path,
) -> None:
    data = base_config()
    data["steps"][2]["zone"] = "bin_a"
    path = write_yaml(data)
    code, out, _ = run_check([str(path), "--json"], capsys)
    report = json.loads(out)
    assert code == 1
    assert report["file"] == str(path) and report["ok"] is False
    assert (report["errors"], report["warnings"]) == (1, 1)
    assert report["findings"][1] == {
        "severity": "error", "path": "steps[2].zone", "line": report["findings"][1]["line"],
        "message": "'bin_a' is a bin zone, but a check step needs a check zone; check zones "
                   "are: pin",
    }
    assert isinstance(report["findings"][1]["line"], int)

    code, out, _ = run_check([str(tmp_path / "none.yaml"), "--json"], capsys)
    assert code == 2
    unreadable = json.loads(out)
    assert unreadable["ok"] is False and "no such file" in unreadable["error"]


def test_expand_writes_out_bolt_circles_and_cross_order(
    write_yaml: Callable[..., Path], base_config: Callable[[], dict[str, Any]],
    capsys: pytest.CaptureFixture[str], tmp_path: Path,
) -> None:
    data = circle_config(base_config())
    path = write_yaml(data)
    code, out, _ = run_check([str(path), "--expand"], capsys)
    assert code == 0
    assert out.startswith(f"# {path}: OK, no errors or warnings (12 zones, 5 steps)\n")
    expanded = yaml.safe_load(out)
    assert [z["id"] for z in expanded["zones"][4:]] == [f"bolt_{n}" for n in range(1, 9)]
    assert expanded["zones"][4]["label"] == "flange bolt 1"
    assert expanded["steps"][4]["zones"] == [
        "bolt_1", "bolt_5", "bolt_3", "bolt_7", "bolt_2", "bolt_6", "bolt_4", "bolt_8"]
    # Pasting the expansion back gives the same plan.
    original = check_data(data, base_dir=tmp_path).config
    pasted = check_data({**data, **expanded}, base_dir=tmp_path)
    assert original is not None and pasted.config is not None, pasted.lines()
    assert pasted.config.to_plan() == original.to_plan()

    code, out, _ = run_check([str(path), "--expand", "--json"], capsys)
    assert json.loads(out)["expanded"] == expanded


def test_expand_with_errors_prints_only_findings(
    write_yaml: Callable[..., Path], base_config: Callable[[], dict[str, Any]],
    capsys: pytest.CaptureFixture[str],
) -> None:
    data = base_config()
    data["zones"][0]["kind"] = "screw"
    code, out, _ = run_check([str(write_yaml(data)), "--expand"], capsys)
    assert code == 1
    assert "zones:" not in out and "NOT usable" in out


def test_help_documents_exit_codes_and_usage_errors(capsys: pytest.CaptureFixture[str]) -> None:
    code, out, _ = run_check(["--help"], capsys)
    assert code == 0
    text = " ".join(out.split())
    assert "exit codes: 0 no errors (warnings allowed), 1 errors found, 2 the file is" in text
    assert "FILE:LINE: error|warning: PATH: MESSAGE" in text
    code, _, err = run_check([], capsys)
    assert code == EXIT_USAGE and "CONFIG" in err


def test_installed_command_checks_the_demo_config() -> None:
    command = Path(sys.executable).with_name("stationcheck")
    result = subprocess.run(
        [str(command), "check", "configs/demo_station.yaml"],
        cwd=REPO_ROOT, capture_output=True, text=True, check=False, timeout=60,
    )
    assert (result.returncode, result.stderr) == (0, "")
    assert result.stdout == (
        "configs/demo_station.yaml: OK, no errors or warnings (9 zones, 4 steps)\n"
    )
