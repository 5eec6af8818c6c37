"""Evaluation end to end: truth readers, the report, and ``stationcheck eval``."""

from __future__ import annotations

import csv
import json
from pathlib import Path

import cv2
import numpy as np
import pytest

from stationcheck.cli import main
from stationcheck.errors import InputFileError
from stationcheck.evaluation.accuracy_report import evaluate
from stationcheck.evaluation.truth import read_coco_frames, read_truth_csv, read_video_frames
from stationcheck.vision.table_detector import TableKeypointDetector
from tests.vision.conftest import blob_frame, blob_model_proto, coarse_info, refine_info

TRUTH_HEADER = [
    "frame_index",
    "t_s",
    "tip_x_px",
    "tip_y_px",
    "tip_v",
    "rear_x_px",
    "rear_y_px",
    "rear_v",
    "zone",
]


def _tip_path(i: int) -> tuple[float, float] | None:
    return None if i in (4, 5) else (200.0 + 9.3 * i, 150.0 + 4.1 * i)


@pytest.fixture
def labelled_video(tmp_path: Path) -> tuple[Path, Path]:
    """A 10-frame mp4v video of a red tip blob (absent in frames 4 and 5) and its truth CSV."""
    video, truth = tmp_path / "clip.mp4", tmp_path / "clip_truth.csv"
    writer = cv2.VideoWriter(str(video), cv2.VideoWriter_fourcc(*"mp4v"), 30.0, (640, 480))
    with open(truth, "w", newline="") as handle:
        out = csv.writer(handle)
        out.writerow(TRUTH_HEADER)
        for i in range(10):
            tip = _tip_path(i)
            writer.write(blob_frame({"tip": tip}) if tip else np.zeros((480, 640, 3), np.uint8))
            if tip:
                out.writerow([i, i / 30, *tip, 2, "", "", 0, "none"])
            else:
                out.writerow([i, i / 30, "", "", 0, "", "", 0, "none"])
    writer.release()
    return video, truth


@pytest.fixture
def blob_model_dir(tmp_path: Path) -> Path:
    import onnx

    onnx.save(blob_model_proto(refine_info()), str(tmp_path / "b.refine.onnx"))
    onnx.save(
        blob_model_proto(coarse_info(refine_model="b.refine.onnx")), str(tmp_path / "b.coarse.onnx")
    )
    return tmp_path / "b.coarse.onnx"


def test_replayed_truth_scores_perfectly(labelled_video: tuple[Path, Path]) -> None:
    video, truth_csv = labelled_video
    truth = read_truth_csv(truth_csv)
    table = {i: {"tip": (r[0, 0], r[0, 1], 0.9 if r[0, 2] else 0.0)} for i, (_, r) in truth.items()}
    fake = TableKeypointDetector(table)
    report = evaluate(fake, read_video_frames(video, truth_csv))
    m = report.metrics
    assert (m.frames, m.visible_frames, m.absent_frames) == (10, 8, 2)
    assert (m.tip_median_px, m.miss_rate, m.false_detection_rate, m.pck_2px) == (0, 0, 0, 1)
    assert report.ap.ap == pytest.approx(1.0)
    # The detector was handed the previous detected tip as its hint, and none after a gap.
    assert fake.hints[0] is None and fake.hints[1] == pytest.approx(_tip_path(0))
    assert fake.hints[5] is None


def test_eval_command_prints_json_with_the_agreed_keys(
    labelled_video: tuple[Path, Path], blob_model_dir: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    video, truth = labelled_video
    code = main(
        [
            "eval",
            "--model",
            str(blob_model_dir),
            "--video",
            str(video),
            "--truth",
            str(truth),
            "--json",
            "--min-score",
            "0.05",
        ]
    )
    figures = json.loads(capsys.readouterr().out)
    assert code == 0
    for key in (
        "tip_median_px",
        "tip_p95_px",
        "pck_5px",
        "miss_rate",
        "false_detection_rate",
        "oks_ap",
    ):
        assert key in figures
    assert figures["frames"] == 10 and figures["tip_median_px"] < 1.5  # mp4v-compressed blobs
    assert figures["miss_rate"] == 0.0


def test_every_nth_frame(labelled_video: tuple[Path, Path]) -> None:
    frames = list(read_video_frames(*labelled_video, every=3))
    assert [f.frame.index for f in frames] == [0, 3, 6, 9]


@pytest.mark.parametrize(
    ("header", "row", "message"),
    [
        (
            ["frame", "time_s", "tip_x", "tip_y", "tip_visibility", "rear_x", "rear_y", "rear_vis"],
            ["0", "0", "1", "2", "2", "3", "4", "2"],
            None,
        ),
        (["frame", "t_s", "tip_x_px"], ["0", "0", "1"], "no tip y column"),
        (["idx", "t_s"], ["0", "0"], "no frame index column"),
        (TRUTH_HEADER, ["0", "0", "abc", "2", "2", "", "", "0", "z"], "bad ground-truth row"),
    ],
)
def test_truth_csv_columns(tmp_path: Path, header: list, row: list, message: str | None) -> None:
    path = tmp_path / "t.csv"
    path.write_text(",".join(header) + "\n" + ",".join(row) + "\n")
    if message is None:
        _t_s, rows = read_truth_csv(path)[0]
        assert rows.tolist() == [[1, 2, 2], [3, 4, 2]]
        return
    with pytest.raises(InputFileError, match=message):
        read_truth_csv(path)


def test_coco_frames_are_read_in_file_order(tmp_path: Path) -> None:
    for name in ("a.png", "b.png"):
        cv2.imwrite(str(tmp_path / name), np.zeros((48, 64, 3), np.uint8))
    data = {
        "images": [{"id": 7, "file_name": "a.png"}, {"id": 9, "file_name": "b.png"}],
        "annotations": [
            {
                "id": 1,
                "image_id": 9,
                "category_id": 3,
                "keypoints": [5, 6, 2, 1, 2, 1],
                "num_keypoints": 2,
            }
        ],
        "categories": [{"id": 3, "name": "fastening_tool", "keypoints": ["rear", "tip"]}],
    }
    (tmp_path / "d.json").write_text(json.dumps(data))
    frames = list(read_coco_frames(tmp_path / "d.json", tmp_path))
    assert frames[0].truth.tolist() == [[0, 0, 0], [0, 0, 0]]
    assert frames[1].truth.tolist() == [[1, 2, 1], [5, 6, 2]]  # reordered to tip, rear


def test_eval_refuses_half_given_inputs(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["eval", "--video", "x.mp4"]) == InputFileError.exit_code
    assert "--video and --truth go together" in capsys.readouterr().err
