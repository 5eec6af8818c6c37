"""Factories for pipeline tests: the demo station's plan and sample files, short runs of the
replay, tiny videos written with OpenCV."""

from __future__ import annotations

from collections.abc import Callable
from pathlib import Path

import cv2
import numpy as np
import pytest

from stationcheck.config import load_config
from stationcheck.core.plan import StationPlan
from stationcheck.pipeline.replay_report import ReplayReport
from stationcheck.pipeline.session import ReplaySettings, run_replay

REPO = Path(__file__).resolve().parents[2]
SAMPLE = REPO / "sample_video"
CONFIG = REPO / "configs" / "demo_station.yaml"
VIDEO = SAMPLE / "demo_station.mp4"
INPUTS = SAMPLE / "demo_station_inputs.jsonl"
EXPECTED = SAMPLE / "demo_station_expected.jsonl"
TRUTH = SAMPLE / "demo_station_truth.csv"
FIRST_UNIT_FRAMES = 467  # PC-000101, the clean unit (sample_video/README.md timeline)

needs_sample = pytest.mark.skipif(
    not (VIDEO.is_file() and INPUTS.is_file() and EXPECTED.is_file() and TRUTH.is_file()),
    reason="the sample video and its sidecars are not rendered (tools/render_sample_video)",
)

Replay = Callable[..., ReplayReport]


@pytest.fixture(scope="session")
def demo_plan() -> StationPlan:
    return load_config(CONFIG).to_plan()


@pytest.fixture
def replay(tmp_path: Path) -> Replay:
    """Runs a replay of the sample video into ``tmp_path``; keyword arguments override
    :class:`ReplaySettings` fields (defaults: ground-truth detector and judgements)."""

    def run(**overrides: object) -> ReplayReport:
        fields: dict[str, object] = {
            "config_path": CONFIG,
            "log_path": tmp_path / "log.sqlite",
            "video": VIDEO,
            "inputs": INPUTS,
            "expected": EXPECTED,
            "truth": TRUTH,
            "detector": "truth",
            "judges": "truth",
        }
        fields.update(overrides)
        return run_replay(ReplaySettings(**fields))  # type: ignore[arg-type]

    return run


def write_video(path: Path, frames: int, size: tuple[int, int] = (64, 48), fps: float = 30.0,
                fourcc: str = "mp4v") -> list[np.ndarray]:
    """A small test video of flat frames whose grey level encodes the frame number."""
    writer = cv2.VideoWriter(str(path), cv2.VideoWriter_fourcc(*fourcc), fps, size)
    assert writer.isOpened()
    images = []
    for index in range(frames):
        image = np.full((size[1], size[0], 3), (index * 4) % 256, np.uint8)
        writer.write(image)
        images.append(image)
    writer.release()
    return images


def demo_config_copy(folder: Path, evidence_images: bool) -> Path:
    """The demo config written into ``folder`` with ``log.evidence_images`` set; its relative
    paths still resolve (the station folder is linked, the video path made absolute)."""
    text = CONFIG.read_text(encoding="utf-8")
    flag = "evidence_images: false"
    assert text.count(flag) == 1
    text = text.replace(flag, f"evidence_images: {'true' if evidence_images else 'false'}")
    text = text.replace("../sample_video/", f"{SAMPLE.as_posix()}/")
    station = CONFIG.parent / CONFIG.stem
    (folder / station.name).symlink_to(station, target_is_directory=True)
    path = folder / CONFIG.name
    path.write_text(text, encoding="utf-8")
    return path
