"""``train --station``: fine-tunes from the station's model on its labels, writes the model into
the station folder, points the config at it and proves it; progress as JSON lines."""

from __future__ import annotations

import hashlib
import json
import shutil
from pathlib import Path

import cv2
import numpy as np
import pytest

pytest.importorskip("torch")

from stationcheck.cli import main
from stationcheck.config import load_config
from stationcheck.config.model_proof import station_model_proof
from stationcheck.demo_station.files import DEMO_CONFIG
from stationcheck.labels.station_labels import StationLabel
from stationcheck.training.station import LabelSource
from tests.evaluation.station_label_fixture import FixtureFrame, write_labels
from tests.training.conftest import toy_sample

PROGRESS_KEYS = {"phase", "step", "max_steps", "elapsed_s", "left_s"}


def _station(tmp_path: Path, labelled: int) -> Path:
    shutil.copytree(DEMO_CONFIG.parent / "demo_station", tmp_path / "demo_station")
    text = DEMO_CONFIG.read_text(encoding="utf-8").replace("../sample_video/demo_station.mp4", "0")
    (tmp_path / "station.yaml").write_text(text, encoding="utf-8")
    rng = np.random.default_rng(5)
    frames = []
    for i in range(labelled):
        image, kps = toy_sample(rng)
        frames.append(
            FixtureFrame("recordings/rec.mp4", 3 * i, i / 10, image, kps if kps[0, 2] else None)
        )
    if labelled:
        write_labels(tmp_path, frames)
    return tmp_path / "station.yaml"


def _run(config: Path, capsys: pytest.CaptureFixture[str]) -> tuple[int, list[dict[str, object]]]:
    code = main(
        [
            "train", "--station", str(config), "--progress-json", "--steps", "2",
            "--batch-size", "4", "--workers", "0", "--calibration-frames", "8",
            "--motion-frames", "0", "--rendered-share", "0",
        ]
    )  # fmt: skip
    out = capsys.readouterr().out
    return code, [json.loads(line) for line in out.splitlines()]


def test_fine_tunes_into_the_station_folder_and_proves_it(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    config = _station(tmp_path, 30)
    code, lines = _run(config, capsys)
    assert code == 0
    progress, last = lines[:-1], lines[-1]
    assert progress and all(set(p) == PROGRESS_KEYS for p in progress)
    assert "training" in {p["phase"] for p in progress}
    assert [p["step"] for p in progress if p["phase"] == "training"][-1] == 2
    model = tmp_path / "model" / "tool_tip.coarse.onnx"
    assert last["done"] is True and Path(str(last["model"])) == model
    assert (tmp_path / "model" / "tool_tip.refine.onnx").is_file()
    assert not (tmp_path / "model.new").exists()
    # the config now names the station's model; its comments are kept
    text = config.read_text(encoding="utf-8")
    assert "  path: model/tool_tip.coarse.onnx" in text
    assert "# stationcheck station config -- DEMO DATA" in text
    assert "# the model shipped in the package, or a path to an .onnx file" in text
    # the fitness report names the file it measured (reference: hashlib over the file)
    report = json.loads((tmp_path / "model" / "fitness.json").read_text(encoding="utf-8"))
    assert report["model_sha256"] == hashlib.sha256(model.read_bytes()).hexdigest()
    assert report == last["fitness"]
    assert report["held_out_frames"] == 6 and report["dry_run"]["skipped"]
    assert station_model_proof(load_config(config)).state in ("fit", "unfit")


def test_no_labels_ends_with_one_error_line(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    config = _station(tmp_path, 0)
    code, lines = _run(config, capsys)
    assert code == 3
    assert set(lines[-1]) == {"error"} and "no labelled frames yet" in str(lines[-1]["error"])
    assert "bundled" in config.read_text(encoding="utf-8")


def _labels(tmp_path: Path, seen: int, absent: int) -> list[StationLabel]:
    image = tmp_path / "frame.png"
    cv2.imwrite(str(image), np.zeros((48, 64, 3), np.uint8))
    out = []
    for index in range(seen + absent):
        points = np.zeros((2, 3))
        if index < seen:
            points[0] = (10.0, 20.0, 2.0)
        out.append(StationLabel(image, "v.mp4", index, index / 30, points, ""))
    return out


@pytest.mark.parametrize(
    ("seen", "absent", "share"), [(100, 900, 0.2), (900, 100, 0.1), (0, 50, 1.0), (50, 0, 0.0)]
)
def test_tool_absent_labels_are_drawn_at_most_a_fifth_of_the_time(
    tmp_path: Path, seen: int, absent: int, share: float
) -> None:
    source = LabelSource(_labels(tmp_path, seen, absent))
    assert source.absent_share == pytest.approx(share)
    rng = np.random.default_rng(0)
    drawn = [source.sample(rng)[1][0, 2] == 0 for _ in range(2000)]
    # binomial, n = 2000, seeded: within 0.05 of the share (5 standard deviations at p = 0.2)
    assert abs(float(np.mean(drawn)) - share) <= 0.05


def test_fast_moving_tips_are_drawn_more_often(tmp_path: Path) -> None:
    from stationcheck.training.station import tip_speeds

    labels = _labels(tmp_path, 6, 0)
    # frames 0..2 still at (10, 20); frame 3 at 40 px from frame 2; frames 4, 5 a video apart
    for index, x in ((3, 50.0), (4, 90.0)):
        labels[index].keypoints[0, 0] = x
    labels[5] = StationLabel(labels[5].image, "w.mp4", 5, 5 / 30, labels[5].keypoints, "")
    # each from its next labelled frame if there is one (frame 2 from frame 3), else its previous
    assert tip_speeds(labels) == [0.0, 0.0, 40.0, 40.0, 40.0, 0.0]
    source = LabelSource(labels)
    rng = np.random.default_rng(1)
    drawn = [int(source.sample(rng)[1][0, 0]) for _ in range(3000)]
    # weights 1, 1, 4, 4, 4, 1 (1 + 40 / 10, capped at 4) of 15: x = 10 on frames 0, 1, 2, 5
    assert abs(drawn.count(10) / 3000 - 7 / 15) <= 0.04
    assert abs(drawn.count(50) / 3000 - 4 / 15) <= 0.04
    assert abs(drawn.count(90) / 3000 - 4 / 15) <= 0.04


def test_a_third_of_the_rendered_frames_show_fast_moves(tmp_path: Path) -> None:
    from types import SimpleNamespace

    from stationcheck.training.station import mixed_source

    def kind(value: int):  # type: ignore[no-untyped-def]
        def sample(rng: np.random.Generator):  # type: ignore[no-untyped-def]
            return np.full((4, 4, 3), value, np.uint8), np.zeros((2, 3))

        return sample

    renderer = SimpleNamespace(
        render_training_sample=kind(1),
        render_station_sample=kind(2),
        render_moving_sample=lambda rng: (*kind(3)(rng), (20.0, 0.0)),
    )
    source = mixed_source(_labels(tmp_path, 10, 0), 0.7, renderer, fast_share=1 / 3)  # type: ignore[arg-type]
    rng = np.random.default_rng(1)
    draws = [int(source.sample(rng)[0][0, 0, 0]) for _ in range(3000)]
    shares = {value: draws.count(value) / len(draws) for value in (1, 2, 3)}
    assert shares[3] == pytest.approx(0.1, abs=0.02)  # a third of the rendered 30 %
    assert shares[1] == pytest.approx(0.1, abs=0.02) and shares[2] == pytest.approx(0.1, abs=0.02)
