"""``stationcheck replay`` and ``stationcheck demo`` from the command line: one clear line and a
documented exit code for every bad input, the log kept up to a failure, JSON output."""

from __future__ import annotations

import json
import sqlite3
from contextlib import closing
from pathlib import Path

import cv2
import pytest

from stationcheck.cli import EXIT_USAGE, main
from stationcheck.vision.detector import bundled_model_path
from tests.pipeline.conftest import (
    CONFIG,
    EXPECTED,
    INPUTS,
    TRUTH,
    VIDEO,
    needs_sample,
)

TRUTH_ARGS = ["--detector", "truth", "--judgements", "truth", "--truth", str(TRUTH)]


def _one_error_line(capfd: pytest.CaptureFixture[str], needle: str) -> None:
    err = capfd.readouterr().err.strip().splitlines()
    assert len(err) == 1, err
    assert err[0].startswith("stationcheck ")
    assert needle in err[0]


def _clip_from_sample(path: Path, frames: int, damage: bool = False) -> None:
    """The first ``frames`` frames of the sample video, re-encoded (optionally damaged)."""
    capture = cv2.VideoCapture(str(VIDEO))
    writer = cv2.VideoWriter(str(path), cv2.VideoWriter_fourcc(*"mp4v"), 30.0, (640, 480))
    for _ in range(frames):
        ok, image = capture.read()
        assert ok
        writer.write(image)
    writer.release()
    capture.release()
    if damage:
        data = bytearray(path.read_bytes())
        for k in range(len(data) * 2 // 3, len(data) * 5 // 6, 5):
            data[k] ^= 0xFF
        path.write_bytes(bytes(data))


@needs_sample
@pytest.mark.parametrize(
    ("change", "code", "needle"),
    [
        ("video_garbage", 3, "cannot read video"),
        ("inputs_missing", 3, "station inputs file not found"),
        ("config_bad", 2, "camera: required"),
        ("model_wrong", 4, "not a readable ONNX model"),
        ("log_used", 6, "already holds events"),
        ("no_inputs", EXIT_USAGE, "needs its station inputs"),
    ],
)
def test_bad_inputs_give_one_line_and_their_exit_code(
    tmp_path: Path, capfd: pytest.CaptureFixture[str], change: str, code: int, needle: str
) -> None:
    video, inputs, config = tmp_path / "video.mp4", str(INPUTS), str(CONFIG)
    video.write_bytes(VIDEO.read_bytes()[:0] + b"\x00" * 3000)
    args_video = str(video) if change == "video_garbage" else str(VIDEO)
    extra: list[str] = []
    log = tmp_path / "log.sqlite"
    if change == "inputs_missing":
        inputs = str(tmp_path / "nope.jsonl")
    if change == "config_bad":
        bad = tmp_path / "station.yaml"
        bad.write_text("format_version: 1\nstation: {name: x, reference_frame: r.png}\n")
        config = str(bad)
    if change == "model_wrong":
        model = tmp_path / "model.onnx"
        model.write_text("not a model")
        extra = ["--model", str(model)]
    if change == "log_used":
        assert main(["replay", str(VIDEO), "--config", config, "--inputs", inputs, "--frames",
                     "60", "--log", str(log), "--json", *TRUTH_ARGS]) == 0
    argv = ["replay", args_video, "--config", config, "--log", str(log), *extra]
    if change != "no_inputs":
        argv += ["--inputs", inputs]
    capfd.readouterr()
    assert main(argv) == code
    _one_error_line(capfd, needle)


@needs_sample
def test_a_video_damaged_mid_way_keeps_the_log_up_to_the_failure(
    tmp_path: Path, capfd: pytest.CaptureFixture[str]
) -> None:
    clip, log = tmp_path / "clip.mp4", tmp_path / "log.sqlite"
    _clip_from_sample(clip, 240, damage=True)
    capfd.readouterr()
    code = main(["replay", str(clip), "--config", str(CONFIG), "--inputs", str(INPUTS),
                 "--log", str(log), "--json", *TRUTH_ARGS])
    assert code == 3
    _one_error_line(capfd, "is damaged: decoding stopped at frame")
    with closing(sqlite3.connect(log)) as conn:
        rows = conn.execute("SELECT kind, data FROM events ORDER BY seq").fetchall()
    kinds = [kind for kind, _ in rows]
    assert kinds[:2] == ["unit_started", "step_started"]
    assert "step_completed" in kinds  # the gasket pick (frame 47) came before the damage
    assert kinds[-1] == "tool_inhibited"
    assert json.loads(rows[-1][1])["reason"] == "stopped_on_error"


@needs_sample
def test_json_output_is_one_object_without_progress(
    tmp_path: Path, capfd: pytest.CaptureFixture[str]
) -> None:
    code = main(["replay", str(VIDEO), "--config", str(CONFIG), "--inputs", str(INPUTS),
                 "--expected", str(EXPECTED), "--frames", "467", "--log",
                 str(tmp_path / "log.sqlite"), "--json", *TRUTH_ARGS])
    out, err = capfd.readouterr()
    assert code == 0
    assert err == ""
    data = json.loads(out)
    assert [(u["serial"], u["result"]) for u in data["units"]] == [("PC-000101", "OK")]
    assert data["mismatches"] == 0 and data["false_enables"] == 0
    assert data["frames"] == 467 and data["last_frame"] == 466


@needs_sample
def test_text_output_has_the_unit_table_and_the_speed(
    tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    code = main(["replay", str(VIDEO), "--config", str(CONFIG), "--inputs", str(INPUTS),
                 "--frames", "467", "--log", str(tmp_path / "log.sqlite"), *TRUTH_ARGS])
    out = capsys.readouterr().out
    assert code == 0
    assert any(line.split()[:3] == ["PC-000101", "first", "OK"] for line in out.splitlines())
    assert "frames/s through the whole decision path" in out


@needs_sample
@pytest.mark.skipif(not bundled_model_path().is_file(), reason="the bundled model is not there")
def test_the_bundled_model_decides_the_first_unit_like_the_ground_truth(
    tmp_path: Path, capfd: pytest.CaptureFixture[str]
) -> None:
    code = main(["replay", str(VIDEO), "--config", str(CONFIG), "--inputs", str(INPUTS),
                 "--expected", str(EXPECTED), "--frames", "467", "--log",
                 str(tmp_path / "log.sqlite"), "--json"])
    data = json.loads(capfd.readouterr().out)
    assert code == 0, data["mismatch_details"]
    assert data["false_enables"] == 0 and data["mismatches"] == 0
    assert data["edge_offset_frames_max"] <= 3


def test_the_demo_never_writes_into_a_folder_that_holds_something(
    tmp_path: Path, capfd: pytest.CaptureFixture[str]
) -> None:
    (tmp_path / "keep.txt").write_text("mine")
    assert main(["demo", "--out", str(tmp_path)]) == 3
    _one_error_line(capfd, "is not empty")
    assert [p.name for p in tmp_path.iterdir()] == ["keep.txt"]


@pytest.mark.parametrize("extra", [["--screen"], ["--pace", "2"]])
def test_screen_and_pace_need_the_video(tmp_path: Path, capfd: pytest.CaptureFixture[str],
                                        extra: list[str]) -> None:
    capfd.readouterr()
    argv = ["replay", "--observations", str(tmp_path / "seen.jsonl"), "--config", str(CONFIG),
            *extra]
    assert main(argv) == EXIT_USAGE
    _one_error_line(capfd, "need the VIDEO")
