"""The committed sample video and its sidecars: they decode, agree with each other and with
what the committed scene script produces today."""

from __future__ import annotations

import json
from collections import Counter

import cv2
import numpy as np
import pytest

from stationcheck.demo_station import layout
from stationcheck.demo_station import sample_video as sv
from stationcheck.pipeline.truth_rows import COLUMNS, read_truth_csv

SAMPLE_DIR = sv.REPO_ROOT / "sample_video"

INPUT_KINDS = {"unit_started", "tool_running", "tightening_result", "operator_ack"}
DECISION_KINDS = {
    "enable",
    "step_done",
    "position_result",
    "rework_mark",
    "check_result",
    "alarm",
    "unit_result",
}


@pytest.fixture(scope="module")
def meta() -> dict:
    return json.loads((SAMPLE_DIR / sv.META_NAME).read_text(encoding="utf-8"))


def test_video_decodes_to_the_expected_frames(meta: dict) -> None:
    """Reference: OpenCV's FFmpeg reader decodes every frame at 640x480 and 30 fps."""
    capture = cv2.VideoCapture(str(SAMPLE_DIR / sv.VIDEO_NAME))
    assert capture.isOpened()
    try:
        assert capture.get(cv2.CAP_PROP_FPS) == pytest.approx(layout.FPS)
        decoded = 0
        while True:
            ok, image = capture.read()
            if not ok:
                break
            assert image.shape == (layout.FRAME_HEIGHT_PX, layout.FRAME_WIDTH_PX, 3)
            decoded += 1
    finally:
        capture.release()
    assert decoded == meta["frame_count"]
    assert (SAMPLE_DIR / sv.VIDEO_NAME).stat().st_size < 25e6


def test_sidecars_agree_with_the_video(meta: dict, read_jsonl) -> None:  # type: ignore[no-untyped-def]
    rows = read_truth_csv(SAMPLE_DIR / sv.TRUTH_NAME)
    fps = meta["fps"]
    assert [r.frame_index for r in rows] == list(range(meta["frame_count"]))
    assert all(r.t_s == pytest.approx(r.frame_index / fps, abs=1e-6) for r in rows)
    for name, kinds in ((sv.INPUTS_NAME, INPUT_KINDS), (sv.EXPECTED_NAME, DECISION_KINDS)):
        items = read_jsonl(SAMPLE_DIR / name)
        assert items and {i["kind"] for i in items} == kinds
        assert [i["frame"] for i in items] == sorted(i["frame"] for i in items)
        for item in items:
            assert 0 <= item["frame"] < meta["frame_count"]
            assert item["t_s"] == pytest.approx(item["frame"] / fps, abs=1e-6)
    serials = [u["serial"] for u in meta["units"]]
    started = [
        i["serial"] for i in read_jsonl(SAMPLE_DIR / sv.INPUTS_NAME) if i["kind"] == "unit_started"
    ]
    assert started == serials


def test_committed_sidecars_match_the_committed_script(production: sv.Production, tmp_path) -> None:  # type: ignore[no-untyped-def]
    sv.write_sidecars(production, tmp_path)
    for name in (sv.TRUTH_NAME, sv.INPUTS_NAME, sv.EXPECTED_NAME, sv.META_NAME):
        assert (tmp_path / name).read_bytes() == (SAMPLE_DIR / name).read_bytes(), name


def test_truth_csv_columns(meta: dict) -> None:
    header = (SAMPLE_DIR / sv.TRUTH_NAME).read_text(encoding="utf-8").splitlines()[0]
    assert tuple(header.split(",")) == COLUMNS
    assert {
        "frame_index",
        "t_s",
        "tip_x_px",
        "tip_y_px",
        "tip_v",
        "rear_x_px",
        "rear_y_px",
        "rear_v",
    } <= set(COLUMNS)


def test_decoded_frames_match_a_fresh_render(renderer: sv.FrameRenderer, meta: dict) -> None:
    """The video shows what the plan says: decoded frames are close to re-rendered ones
    (PSNR above 28 dB after mp4v compression)."""
    capture = cv2.VideoCapture(str(SAMPLE_DIR / sv.VIDEO_NAME))
    try:
        for frame in (5, meta["frame_count"] // 2, meta["frame_count"] - 5):
            capture.set(cv2.CAP_PROP_POS_FRAMES, frame)
            ok, decoded = capture.read()
            assert ok
            assert cv2.PSNR(decoded, renderer.render(frame)) > 28.0, frame
    finally:
        capture.release()


def test_the_script_covers_every_scene_kind(production: sv.Production) -> None:
    alarms = Counter(d["alarm"] for d in production.decisions if d["kind"] == "alarm")
    assert alarms == {
        "wrong_bin": 1,
        "wrong_position": 1,
        "check_failed": 1,
        "tool_lost": 1,
        "camera_moved": 1,
    }
    results = [
        (d["serial"], d["result"]) for d in production.decisions if d["kind"] == "unit_result"
    ]
    assert results == [
        ("PC-000101", "OK"),
        ("PC-000102", "OK"),
        ("PC-000103", "OK"),
        ("PC-000104", "NOK"),
        ("PC-000104", "OK"),
        ("PC-000105", "not_released"),
        ("PC-000106", "OK"),
        ("PC-000107", "not_released"),
    ]
    marks = [(d["serial"], d["zone"]) for d in production.decisions if d["kind"] == "rework_mark"]
    assert marks == [("PC-000104", "screw_3")]
    retry = [
        d for d in production.decisions if d["kind"] == "position_result" and d["attempt"] == 2
    ]
    assert [(d["serial"], d["zone"], d["ok"]) for d in retry] == [
        ("PC-000103", "screw_5", True),
        ("PC-000104", "screw_3", False),
    ]
    assert production.choreography.frame_count / production.choreography.fps <= 125.0


def test_every_tool_run_is_inside_an_enabled_interval(production: sv.Production) -> None:
    enabled = np.zeros(production.choreography.frame_count + 1, bool)
    on_at = None
    for d in production.decisions:
        if d["kind"] == "enable":
            if d["on"]:
                on_at = d["frame"]
            else:
                assert on_at is not None
                enabled[on_at : d["frame"] + 1] = True
                on_at = None
    runs = [i for i in production.choreography.inputs if i.kind == "tool_running"]
    assert runs and all(enabled[i.frame] for i in runs)


def test_contact_sheet_and_reference_exist() -> None:
    sheet = cv2.imread(str(SAMPLE_DIR / sv.CONTACT_SHEET_NAME))
    reference = cv2.imread(str(sv.DEFAULT_REFERENCE))
    assert sheet is not None and sheet.shape[1] == 4 * 320
    assert reference is not None and reference.shape == (
        layout.FRAME_HEIGHT_PX,
        layout.FRAME_WIDTH_PX,
        3,
    )
