"""The station's COCO keypoint dataset: read back with pycocotools (the COCO reference API),
scored against itself with its COCOeval (OKS AP 1.0 only if every field COCO needs is right),
merged per (video, frame index), written atomically."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest

from stationcheck.errors import InputFileError
from stationcheck.labels import coco_store
from stationcheck.labels.records import FrameLabel
from stationcheck.labels.video_frames import VideoFrames
from stationcheck.sources.recorder import record
from stationcheck.sources.video_file import VideoFileSource
from tests.labels.conftest import VIDEO


@pytest.fixture(scope="module")
def clip(tmp_path_factory: pytest.TempPathFactory) -> Path:
    path = tmp_path_factory.mktemp("video") / "bench_a.mp4"
    source = VideoFileSource(VIDEO, first_frame=800, max_frames=12)
    try:
        record(source, path, 12)
    finally:
        source.close()
    return path


LABELS = [
    FrameLabel(0, (379.9, 180.6), (429.8, 328.7), "clicked"),
    FrameLabel(1, (379.3, 180.9), (429.0, 329.0), "propagated"),
    FrameLabel(2, (300.0, 400.0), (330.0, 530.0), "clicked"),  # rear below the picture
    FrameLabel(5, None, None, "clicked"),
]


def test_dataset_loads_and_scores_with_pycocotools(clip: Path, tmp_path: Path) -> None:
    from pycocotools.coco import COCO
    from pycocotools.cocoeval import COCOeval

    video = VideoFrames(clip)
    result = coco_store.save(tmp_path, video, LABELS)
    video.close()
    assert result.path == tmp_path / "labels" / "coco.json"
    assert (result.images, result.annotations, result.written) == (4, 3, 4)
    coco = COCO(str(result.path))
    (category,) = coco.loadCats(coco.getCatIds())
    assert category == {"id": 1, "name": "tool", "keypoints": ["tip", "rear"], "skeleton": [[1, 2]]}
    images = {image["frame_index"]: image for image in coco.dataset["images"]}
    assert images[5]["tool_visible"] is False and coco.getAnnIds(imgIds=[images[5]["id"]]) == []
    assert images[2]["video"] == "bench_a.mp4" and images[2]["t_s"] == pytest.approx(
        2 / 30, abs=1e-4
    )
    assert images[2]["file_name"] == "bench_a_000002.png"
    for index in (0, 1, 2, 5):
        assert (tmp_path / "labels" / "images" / images[index]["file_name"]).is_file()
    (below,) = coco.loadAnns(coco.getAnnIds(imgIds=[images[2]["id"]]))
    assert below["keypoints"] == [300.0, 400.0, 2, 0.0, 0.0, 0] and below["num_keypoints"] == 1
    (first,) = coco.loadAnns(coco.getAnnIds(imgIds=[images[0]["id"]]))
    assert first["keypoints"] == [379.9, 180.6, 2, 429.8, 328.7, 2]
    assert first["label_source"] == "clicked" and first["iscrowd"] == 0
    x, y, w, h = first["bbox"]
    assert x <= 379.9 and y <= 180.6 and x + w >= 429.8 and y + h >= 328.7
    assert first["area"] == pytest.approx(w * h, abs=0.01)

    results = [{**a, "score": 1.0} for a in coco.dataset["annotations"]]
    evaluation = COCOeval(coco, coco.loadRes(results), "keypoints")
    evaluation.params.kpt_oks_sigmas = np.array([0.025, 0.035])
    evaluation.evaluate()
    evaluation.accumulate()
    evaluation.summarize()
    assert evaluation.stats[0] == pytest.approx(1.0)  # AP over OKS 0.50:0.95


def test_saving_again_replaces_per_frame_and_keeps_the_rest(clip: Path, tmp_path: Path) -> None:
    video = VideoFrames(clip)
    coco_store.save(tmp_path, video, LABELS)
    again = coco_store.save(
        tmp_path,
        video,
        [
            FrameLabel(1, (100.0, 100.0), (150.0, 250.0), "clicked"),
            FrameLabel(7, None, None, "clicked"),
            FrameLabel(8, None, None, "propagated"),  # inside a run marked out of view
        ],
    )
    video.close()
    assert (again.images, again.annotations, again.written) == (6, 3, 2)
    stored = {
        label.frame_index: label
        for label in coco_store.labels_of(tmp_path / "labels", "bench_a.mp4")
    }
    assert sorted(stored) == [0, 1, 2, 5, 7, 8]
    assert stored[1] == FrameLabel(1, (100.0, 100.0), (150.0, 250.0), "clicked")
    assert stored[2].rear is None and not stored[7].visible
    assert stored[7].source == "clicked" and stored[8] == FrameLabel(8, None, None, "propagated")
    doc = json.loads(again.path.read_text())
    assert [image["id"] for image in doc["images"]] == [1, 2, 3, 4, 5, 6]
    assert len({a["id"] for a in doc["annotations"]}) == 3
    assert not [p for p in (tmp_path / "labels").rglob(".*")]  # no temporary file left


def test_a_damaged_dataset_is_reported_not_overwritten(clip: Path, tmp_path: Path) -> None:
    folder = tmp_path / "labels"
    folder.mkdir()
    (folder / "coco.json").write_text("{not json")
    video = VideoFrames(clip)
    with pytest.raises(InputFileError, match="cannot read the labels"):
        coco_store.save(tmp_path, video, LABELS)
    video.close()
    assert (folder / "coco.json").read_text() == "{not json"


@pytest.mark.parametrize(
    ("doc", "message"),
    [
        ({"frame_index": -1, "tip": None, "rear": None}, "frame_index must be >= 0"),
        ({"frame_index": 1, "tip": [1, "x"], "rear": None}, "tip must be"),
        ({"frame_index": 1, "tip": None, "rear": [1, 2]}, "a rear without a tip"),
        ({"frame_index": 1, "tip": [1, 2], "rear": None, "source": "guess"}, "source must be"),
    ],
)
def test_bad_labels_are_refused(doc: dict, message: str) -> None:  # type: ignore[type-arg]
    with pytest.raises(ValueError, match=message):
        FrameLabel.from_json(doc)
