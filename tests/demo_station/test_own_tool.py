"""The fast part of the own-tool demonstration (the long part: ``tools/own_tool_demo.py``): a
recording with the held-out tool, labelled as on the Label tab (simulated clicks on the proposed
and queued frames, the product's propagation between them), stored as the station's COCO
dataset; the bundled model misses the unseen tool."""

from __future__ import annotations

from pathlib import Path

import cv2
import numpy as np
import pytest

from stationcheck.core.records import Frame
from stationcheck.demo_station import sample_video as sv
from stationcheck.demo_station.files import DEMO_CONFIG
from stationcheck.demo_station.own_tool import (
    RECORDING_SCRIPT,
    save_labels,
    simulate_labelling,
    unseen_rig,
)
from stationcheck.evaluation.accuracy_report import evaluate
from stationcheck.evaluation.truth import LabelledFrame
from stationcheck.labels.records import FrameLabel
from stationcheck.labels.station_labels import read_station_labels
from stationcheck.vision.detector import load_detector

FRAMES = 150
BUDGET = 20  # clicks; the first 150 frames are mostly fast moves


@pytest.fixture(scope="module")
def recording(tmp_path_factory: pytest.TempPathFactory) -> tuple[Path, list[sv.TruthRow]]:
    production = sv.produce(RECORDING_SCRIPT, DEMO_CONFIG, rig=unseen_rig())
    renderer = sv.FrameRenderer(production)
    station = tmp_path_factory.mktemp("station")
    video = station / "recordings" / "rec.mp4"
    video.parent.mkdir(parents=True)
    writer = cv2.VideoWriter(str(video), cv2.VideoWriter.fourcc(*"mp4v"), 30.0, (640, 480))
    for index in range(FRAMES):
        writer.write(renderer.render(index))
    writer.release()
    return video, production.rows[:FRAMES]


def _tip_errors(labels: list[FrameLabel], rows: list[sv.TruthRow], source: str) -> list[float]:
    return [
        float(
            np.hypot(
                lab.tip[0] - rows[lab.frame_index].tip_x_px,
                lab.tip[1] - rows[lab.frame_index].tip_y_px,
            )
        )
        for lab in labels
        if lab.source == source and lab.tip is not None and rows[lab.frame_index].tip_v == 2
    ]


def test_a_few_clicks_label_most_frames_close_to_the_truth(
    recording: tuple[Path, list[sv.TruthRow]],
) -> None:
    video, rows = recording
    labels, clicks, _ = simulate_labelling(video, rows, budget=BUDGET, seed=1, proposals=10)
    assert clicks <= BUDGET and len(labels) >= 0.45 * FRAMES
    assert len({lab.frame_index for lab in labels}) == len(labels)
    clicked = _tip_errors(labels, rows, "clicked")
    propagated = _tip_errors(labels, rows, "propagated")
    assert clicked and max(clicked) < 4.5  # 1 px noise per axis
    # the Label tab's propagation: within a few px of the renderer's truth
    assert len(propagated) > 40 and float(np.median(propagated)) < 2.0
    assert float(np.percentile(propagated, 95)) < 5.0
    station = video.parent.parent
    saved = save_labels(station, video, labels, every=5)
    read_back = read_station_labels(station)
    assert saved.images == len(read_back)
    assert {i.label_source for i in read_back} == {"clicked", "propagated"}
    assert all(i.video == "recordings/rec.mp4" for i in read_back)
    assert all(i.image.is_file() for i in read_back)
    assert sum(i.label_source == "clicked" for i in read_back) == sum(
        lab.source == "clicked" and lab.tip is not None for lab in labels
    )
    # Reference: pycocotools reads the written dataset.
    coco = pytest.importorskip("pycocotools.coco").COCO(str(station / "labels" / "coco.json"))
    assert len(coco.getImgIds()) == len(read_back)


def test_the_bundled_model_misses_the_unseen_tool(
    recording: tuple[Path, list[sv.TruthRow]],
) -> None:
    video, rows = recording
    capture = cv2.VideoCapture(str(video))
    frames = []
    for row in rows:
        ok, image = capture.read()
        assert ok
        truth = np.array(
            [[row.tip_x_px, row.tip_y_px, row.tip_v], [row.rear_x_px, row.rear_y_px, row.rear_v]]
        )
        frames.append(LabelledFrame(Frame(row.frame_index, row.t_s, image), truth))
    capture.release()
    report = evaluate(load_detector(None), frames)
    assert report.metrics.visible_frames > 100
    assert report.metrics.miss_rate > 0.2


def _rows(shows: str) -> list[sv.TruthRow]:
    """Rows whose only use here is ``tip_v``: "x" the tip shows, "." it does not."""
    from types import SimpleNamespace
    from typing import cast

    return [cast(sv.TruthRow, SimpleNamespace(tip_v=2 if c == "x" else 0)) for c in shows]


@pytest.mark.parametrize(
    ("shows", "run", "marks", "to_click"),
    [
        # frames 0..9 lie before a "not visible" click at 10; the tool leaves at frame 4
        ("xxxx......", (0, 9, False, True), [(4, 9)], None),
        ("..........", (0, 9, False, True), [(0, 9)], None),
        ("......xxxx", (0, 9, True, False), [(0, 5)], None),
        # between two "not visible" clicks, the tool back in view for a moment
        ("...xx.....", (0, 9, True, True), [(0, 2), (5, 9)], 3),
    ],
)
def test_the_engineer_marks_what_the_strip_shows_out_of_view(
    shows: str, run: tuple[int, int, bool, bool], marks: list[tuple[int, int]], to_click: int | None
) -> None:
    from stationcheck.demo_station.own_tool import look_over
    from stationcheck.labels.propagation import HiddenRun

    assert look_over(HiddenRun(*run), _rows(shows)) == (marks, to_click)
