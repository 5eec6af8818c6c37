"""``stationcheck record``: frames from a file source into an mp4v file inside --root, read
back with OpenCV; refusals (outside --root, existing file, wrong suffix) are one line."""

from __future__ import annotations

import shutil
from pathlib import Path

import cv2
import numpy as np
import pytest

from stationcheck.cli import main
from stationcheck.sources.video_file import VideoFileSource

REPO = Path(__file__).resolve().parents[2]
VIDEO = REPO / "sample_video" / "demo_station.mp4"


@pytest.fixture
def root(tmp_path: Path, monkeypatch: pytest.MonkeyPatch) -> Path:
    shutil.copy(VIDEO, tmp_path / "source.mp4")
    monkeypatch.chdir(tmp_path)
    return tmp_path


def test_records_the_asked_frames(root: Path, capsys: pytest.CaptureFixture[str]) -> None:
    assert (
        main(["record", "--source", "source.mp4", "--out", "rec/clip.mp4", "--frames", "25"]) == 0
    )
    out = capsys.readouterr().out
    assert "Privacy:" in out and "recorded 25 frames" in out
    recorded = VideoFileSource(root / "rec" / "clip.mp4")
    original = VideoFileSource(root / "source.mp4", max_frames=25)
    try:
        pairs = list(zip(recorded, original, strict=True))
        assert recorded.fps == pytest.approx(original.fps)
    finally:
        recorded.close()
        original.close()
    assert len(pairs) == 25
    for new, old in pairs:  # mp4v is lossy: the same picture within a few grey levels
        difference = cv2.absdiff(new.image, old.image)
        assert float(np.mean(difference)) < 4.0
    assert not list((root / "rec").glob(".*"))  # no temporary file left


@pytest.mark.parametrize(
    ("args", "code", "message"),
    [
        (["--source", str(VIDEO), "--out", "a.mp4"], 3, "lies outside --root"),
        (["--source", "source.mp4", "--out", "../a.mp4"], 3, "lies outside --root"),
        (["--source", "source.mp4", "--out", "a.avi"], 64, "--out must end in .mp4"),
        (["--source", "source.mp4", "--out", "source.mp4"], 3, "exists already"),
        (["--source", "missing.mp4", "--out", "a.mp4"], 3, "video file not found"),
        (["--source", "source.mp4", "--out", "a.mp4", "--frames", "0"], 64, "must be > 0"),
    ],
)
def test_refusals_are_one_line(
    root: Path, capsys: pytest.CaptureFixture[str], args: list[str], code: int, message: str
) -> None:
    assert main(["record", *args]) == code
    err = capsys.readouterr().err
    assert message in err and len(err.strip().splitlines()) == 1
    assert not (root / "a.mp4").exists()
