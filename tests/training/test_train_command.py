"""``stationcheck train`` on a user's COCO keypoint dataset (a few steps)."""

from __future__ import annotations

import json
from pathlib import Path

import cv2
import numpy as np
import pytest

pytest.importorskip("torch")

from stationcheck.cli import main
from stationcheck.vision.detector import load_detector
from tests.training.conftest import toy_sample


def write_coco(root: Path, count: int) -> Path:
    rng = np.random.default_rng(4)
    images, annotations = [], []
    for i in range(count):
        image, kps = toy_sample(rng)
        cv2.imwrite(str(root / f"{i:03d}.png"), image)
        images.append({"id": i + 1, "file_name": f"{i:03d}.png", "width": 640, "height": 480})
        if kps[:, 2].any():
            annotations.append(
                {
                    "id": i + 1,
                    "image_id": i + 1,
                    "category_id": 1,
                    "keypoints": kps.reshape(-1).tolist(),
                    "num_keypoints": int((kps[:, 2] > 0).sum()),
                    "iscrowd": 0,
                }
            )
    categories = [{"id": 1, "name": "fastening_tool", "keypoints": ["tip", "rear"]}]
    path = root / "train.json"
    path.write_text(
        json.dumps({"images": images, "annotations": annotations, "categories": categories})
    )
    return path


@pytest.mark.train
def test_train_command_on_coco_writes_a_loadable_bundle(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    coco = write_coco(tmp_path, 8)
    out = tmp_path / "model"
    code = main(
        [
            "train",
            "--coco",
            str(coco),
            "--images",
            str(tmp_path),
            "--steps",
            "2",
            "--batch-size",
            "2",
            "--workers",
            "0",
            "--calibration-frames",
            "3",
            "--out",
            str(out),
            "--name",
            "mine",
            "--learning-rate",
            "5e-4",
        ]
    )
    assert code == 0
    assert "wrote" in capsys.readouterr().out
    detector = load_detector(out / "mine.coarse.onnx")
    assert detector.refine is not None and detector.refine.path.name == "mine.refine.onnx"
    assert (out / "checkpoint.pt").is_file()
    import torch

    saved = torch.load(out / "checkpoint.pt", map_location="cpu", weights_only=True)
    assert saved["config"]["learning_rate"] == 5e-4


def test_train_command_refuses_coco_without_images(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["train", "--coco", "x.json"]) == 3
    assert "--coco and --images go together" in capsys.readouterr().err
