"""A station's model counts as proven only with a fitness report naming its exact files."""

from __future__ import annotations

import hashlib
import json
import shutil
from pathlib import Path

import pytest

from stationcheck.config import check_file
from stationcheck.config.model_proof import model_proof
from stationcheck.demo_station.files import DEMO_CONFIG


def _sha(path: Path) -> str:
    # Reference: the standard library's hashlib over the whole file at once.
    return hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.fixture
def station(tmp_path: Path) -> Path:
    shutil.copytree(DEMO_CONFIG.parent / "demo_station", tmp_path / "demo_station")
    text = DEMO_CONFIG.read_text(encoding="utf-8")
    text = text.replace("path: bundled", "path: model/tool_tip.coarse.onnx")
    text = text.replace("demo_data: true", "demo_data: false")
    text = text.replace("../sample_video/demo_station.mp4", "0")
    (tmp_path / "station.yaml").write_text(text, encoding="utf-8")
    (tmp_path / "model").mkdir()
    (tmp_path / "model" / "tool_tip.coarse.onnx").write_bytes(b"coarse model bytes")
    (tmp_path / "model" / "tool_tip.refine.onnx").write_bytes(b"refine model bytes")
    return tmp_path


def _report(station: Path, fit: bool, **changes: object) -> None:
    report = {
        "model_sha256": _sha(station / "model" / "tool_tip.coarse.onnx"),
        "refine_model": "tool_tip.refine.onnx",
        "refine_sha256": _sha(station / "model" / "tool_tip.refine.onnx"),
        "fit": fit,
        "reasons": [] if fit else ["misses 7.0% > 2%"],
        "tip_p95_px": 3.2,
        "miss_rate": 0.0 if fit else 0.07,
        "false_detection_rate": 0.0,
        **changes,
    }
    (station / "model" / "fitness.json").write_text(json.dumps(report), encoding="utf-8")


def _proof(station: Path) -> tuple[str, str]:
    proof = model_proof(station / "model" / "tool_tip.coarse.onnx", station)
    return proof.state, proof.message


def test_no_report_is_unproven(station: Path) -> None:
    state, message = _proof(station)
    assert state == "unproven" and "no fitness report" in message and "eval --station" in message


def test_a_matching_fit_report_proves_the_model(station: Path) -> None:
    _report(station, fit=True)
    state, message = _proof(station)
    assert state == "fit" and "tip p95 3.20 px" in message and "misses 0.0%" in message
    assert check_file(station / "station.yaml").warnings == []


def test_an_unfit_report_says_why(station: Path) -> None:
    _report(station, fit=False)
    state, message = _proof(station)
    assert state == "unfit" and "NOT FIT" in message and "misses 7.0% > 2%" in message
    warnings = check_file(station / "station.yaml").warnings
    assert [(w.path, "NOT FIT" in w.message) for w in warnings] == [(("model", "path"), True)]


@pytest.mark.parametrize("changed", ["tool_tip.coarse.onnx", "tool_tip.refine.onnx"])
def test_a_changed_model_file_is_unproven_again(station: Path, changed: str) -> None:
    _report(station, fit=True)
    (station / "model" / changed).write_bytes(b"retrained elsewhere")
    state, message = _proof(station)
    assert state == "unproven" and "another model file" in message
    warnings = check_file(station / "station.yaml").warnings
    assert [w.path for w in warnings] == [("model", "path")]


def test_bundled_model_at_the_demo_station_is_the_demo_model() -> None:
    result = check_file(DEMO_CONFIG)
    assert result.warnings == []


def test_check_command_warns_loudly_about_the_bundled_model_at_a_real_station(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    from stationcheck.cli import main

    shutil.copytree(DEMO_CONFIG.parent / "demo_station", tmp_path / "demo_station")
    text = DEMO_CONFIG.read_text(encoding="utf-8").replace("demo_data: true", "demo_data: false")
    text = text.replace("../sample_video/demo_station.mp4", "0")
    (tmp_path / "station.yaml").write_text(text, encoding="utf-8")
    code = main(["check", str(tmp_path / "station.yaml")])
    out, err = capsys.readouterr()
    assert code == 0 and "OK, no errors or warnings" in out
    assert "!! UNPROVEN MODEL: no fitness report" in err
