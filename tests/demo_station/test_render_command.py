"""``stationcheck render``: the training-frame writer from the command line."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from stationcheck.cli import EXIT_USAGE, main


def test_render_training_writes_a_coco_dataset(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "frames"
    assert main(["render", "training", "--out", str(out), "--count", "2", "--seed", "4"]) == 0
    doc = json.loads((out / "annotations.json").read_text(encoding="utf-8"))
    assert [img["file_name"] for img in doc["images"]] == ["000000.jpg", "000001.jpg"]
    assert all((out / "images" / img["file_name"]).is_file() for img in doc["images"])
    assert "wrote 2 frames" in capsys.readouterr().out


@pytest.mark.parametrize(
    "args",
    [
        ["render", "training", "--out", "x", "--count", "0"],
        ["render", "training", "--out", "x", "--count", "3", "--station-fraction", "1.5"],
        ["render", "training", "--count", "3"],
        ["render"],
    ],
)
def test_render_usage_errors(args: list[str], capsys: pytest.CaptureFixture[str]) -> None:
    assert main(args) == EXIT_USAGE
    assert "usage:" in capsys.readouterr().err
