"""The fine-tune child: progress lines parsed, the result line kept, a failing child's last
words reported, cancel ends it. Stand-in children here; the product runs stationcheck train."""

from __future__ import annotations

import sys
import time
from pathlib import Path

from stationcheck.labels.train_child import TrainingChild, train_command


def _finished(child: TrainingChild, deadline_s: float = 20.0) -> dict:  # type: ignore[type-arg]
    end = time.monotonic() + deadline_s
    while time.monotonic() < end:
        state = child.state()
        if state["result"] is not None:
            return state
        time.sleep(0.02)
    raise AssertionError("the child did not finish in time")


DONE = """
import json
print(json.dumps({"phase": "fine-tune", "step": 10, "max_steps": 10, "elapsed_s": 3.0,
                  "left_s": 0.0}))
print(json.dumps({"done": True, "model": "labels/model.onnx", "fitness": {"fit": True}}))
"""


def test_progress_and_result_lines(tmp_path: Path) -> None:
    state = _finished(TrainingChild([sys.executable, "-c", DONE], tmp_path))
    assert state["progress"]["step"] == 10 and state["running"] is False
    assert state["result"] == {"done": True, "model": "labels/model.onnx", "fitness": {"fit": True}}


def test_a_child_without_result_line_says_why(tmp_path: Path) -> None:
    child = TrainingChild(
        [sys.executable, "-c", "import sys; print('no labels found', file=sys.stderr); exit(3)"],
        tmp_path,
    )
    state = _finished(child)
    assert state["result"]["error"] == "the training stopped (exit code 3): no labels found"


def test_a_command_that_cannot_start(tmp_path: Path) -> None:
    state = TrainingChild([str(tmp_path / "no-such-program")], tmp_path).state()
    assert state["result"]["error"].startswith("cannot start the training")


def test_the_product_runs_the_station_fine_tune() -> None:
    command = train_command(Path("station/station.yaml"))
    assert command[1:] == [
        "-m",
        "stationcheck",
        "train",
        "--station",
        "station/station.yaml",
        "--progress-json",
    ]
