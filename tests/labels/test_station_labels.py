"""A station's labels read back, and split by time (never at random)."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from stationcheck.errors import InputFileError
from stationcheck.labels.station_labels import read_station_labels, split_by_time
from tests.evaluation.station_label_fixture import FixtureFrame, write_labels

BLANK = np.full((48, 64, 3), 128, np.uint8)


def _frames(video: str, count: int, fps: float = 10.0, absent: tuple[int, ...] = ()) -> list[FixtureFrame]:
    return [
        FixtureFrame(
            video,
            i,
            i / fps,
            BLANK,
            None if i in absent else np.array([[10.0 + i, 20.0, 2], [40.0, 20.0, 2]]),
            "clicked" if i % 10 == 0 else "propagated",
        )
        for i in range(count)
    ]


def test_labels_read_back_with_their_source_and_visibility(tmp_path: Path) -> None:
    frames = _frames("recordings/a.mp4", 12, absent=(3,))
    frames.append(FixtureFrame("recordings/a.mp4", 50, 5.0, BLANK, None, unlabelled=True))
    write_labels(tmp_path, frames)
    labels = read_station_labels(tmp_path)
    assert len(labels) == 12  # the proposed but unlabelled frame is not a label
    assert labels[3].keypoints.tolist() == [[0, 0, 0], [0, 0, 0]] and not labels[3].tool_visible
    assert labels[4].keypoints[0].tolist() == [14.0, 20.0, 2.0]
    assert (labels[0].label_source, labels[1].label_source) == ("clicked", "propagated")
    assert labels[5].image.is_file() and labels[5].image.name == "a_000005.png"


def test_the_label_file_loads_in_pycocotools(tmp_path: Path) -> None:
    # Reference: pycocotools' own COCO loader reads the station's dataset format.
    coco_module = pytest.importorskip("pycocotools.coco")
    path = write_labels(tmp_path, _frames("a.mp4", 5, absent=(2,)))
    coco = coco_module.COCO(str(path))
    assert len(coco.getImgIds()) == 5 and len(coco.getAnnIds()) == 4
    assert coco.loadCats(1)[0]["keypoints"] == ["tip", "rear"]


def test_split_holds_out_the_end_of_each_video_by_time(tmp_path: Path) -> None:
    # two videos, 100 s each at 1 frame/s; labels arrive unsorted
    frames = _frames("b.mp4", 101, fps=1.0) + _frames("a.mp4", 101, fps=1.0)
    write_labels(tmp_path, frames[::-1])
    split = split_by_time(read_station_labels(tmp_path))
    for video in ("a.mp4", "b.mp4"):
        held = [i.t_s for i in split.held_out if i.video == video]
        cal = [i.t_s for i in split.calibration if i.video == video]
        train = [i.t_s for i in split.train if i.video == video]
        assert min(held) == 80.0 and max(held) == 100.0  # the last 20 % of the span
        assert min(cal) == 70.0 and max(cal) < 80.0 - 1.0 + 1e-9  # 10 % before, 1 s gap
        assert max(train) < 70.0 - 1.0 + 1e-9 and min(train) == 0.0
    assert split.held_out_spans() == {"a.mp4": (80.0, 100.0), "b.mp4": (80.0, 100.0)}
    parts = [set(map(id, p)) for p in (split.train, split.calibration, split.held_out)]
    assert not (parts[0] & parts[1] or parts[0] & parts[2] or parts[1] & parts[2])


@pytest.mark.parametrize(
    ("write", "message"),
    [
        (lambda d: None, "no labelled frames yet"),
        (lambda d: (d / "labels").mkdir() or (d / "labels" / "coco.json").write_text("{"), "not a readable"),
        (lambda d: write_labels(d, [FixtureFrame("a.mp4", 0, 0.0, BLANK, None, unlabelled=True)]), "no labelled frames"),
    ],
    ids=["no labels", "not JSON", "nothing labelled"],
)
def test_unusable_labels_are_one_line(tmp_path: Path, write: object, message: str) -> None:
    write(tmp_path)  # type: ignore[operator]
    with pytest.raises(InputFileError, match=message):
        read_station_labels(tmp_path)


def test_too_few_labels_to_hold_out_is_said(tmp_path: Path) -> None:
    write_labels(tmp_path, _frames("a.mp4", 1))
    with pytest.raises(InputFileError, match="too few labelled frames"):
        split_by_time(read_station_labels(tmp_path))
