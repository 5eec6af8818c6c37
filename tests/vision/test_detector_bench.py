"""The detector section of ``stationcheck bench`` (figures are measured, never asserted)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from stationcheck.benches.measuring import SECTION_MODULES, load_sections
from stationcheck.cli import main


def test_bench_registry_lists_the_detector_section() -> None:
    sections = load_sections()
    assert "detector" in sections and len(sections) == len(SECTION_MODULES)
    assert callable(sections["detector"].measure)


def test_bench_detector_section_reports_every_stage(
    blob_bundle: Path, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code = main(
        [
            "bench",
            "--section",
            "detector",
            "--frames",
            "10",
            "--threads",
            "1,2",
            "--model",
            str(blob_bundle),
            "--video",
            str(tmp_path / "none.mp4"),
            "--json",
        ]
    )
    assert code == 0
    rows = json.loads(capsys.readouterr().out)["rows"]
    names = {r["name"] for r in rows}
    for stage in ("preprocess", "inference", "decode", "total"):
        for label in ("1 thread", "2 threads"):
            assert f"{stage} ({label})" in names
    assert "resident memory (process)" in names
    total = next(r for r in rows if r["name"] == "total (1 thread)")
    assert 0 < total["median"] <= total["p99"]


def test_bench_refuses_unknown_sections(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["bench", "--section", "nope"]) != 0
    assert "unknown bench section" in capsys.readouterr().err
