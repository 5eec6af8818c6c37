"""Rendered scenes in which the operator leaves the due position without running the tool.

The scene's ground truth comes from the project's renderer (choreography and rig, the same as
the sample video's; no pixels are needed for the tip's true path). The real tracker, zone map
and sequencer run on the true keypoints, and the enable is compared with the true tip, counted
the same way as the replay's false enables (inside the target zone or within its hysteresis).
The One Euro smoothing lags a tip that starts to move; a visit that waited for the smoothed tip
alone kept the enable one frame after the tip had truly left.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from stationcheck.demo_station import sample_video as sv
from stationcheck.demo_station.rig import OperatorRig
from stationcheck.pipeline.comparison import count_false_enables
from stationcheck.pipeline.decision_core import DecisionCore
from stationcheck.pipeline.decision_trace import RunTrace
from stationcheck.pipeline.frame_loop import run_loop
from stationcheck.pipeline.frame_path import FramePath
from stationcheck.pipeline.station_inputs import InputSchedule, parse_input
from stationcheck.pipeline.truth_sidecar import TruthJudge, TruthTable, truth_detector
from stationcheck.sources.memory_source import MemoryFrameSource

SCENES = Path(__file__).resolve().parent / "scenes"


@pytest.mark.parametrize("seed", [11, 12, 13])
def test_leaving_the_due_position_without_running_drops_the_enable_on_that_frame(
    demo_rig: OperatorRig, seed: int,
) -> None:
    production = sv.produce(script_path=SCENES / "leave_without_running.yaml", seed=seed,
                            rig=demo_rig)
    plan, fps = production.plan, production.choreography.fps
    table = TruthTable(SCENES, {row.frame_index: row for row in production.rows})
    trace = RunTrace()
    path = FramePath(plan, truth_detector(table), DecisionCore(plan, sinks=[trace]),
                     [TruthJudge(table, plan)])
    inputs = [parse_input({"t_s": round(item.frame / fps, 6), "kind": item.kind, **item.data},
                          f"input {n}") for n, item in enumerate(production.choreography.inputs)]
    images = [np.zeros((8, 8, 3), np.uint8)] * production.choreography.frame_count
    run_loop(MemoryFrameSource(images, fps), path, InputSchedule(inputs))
    left = [d for d in production.decisions
            if d["kind"] == "enable" and not d["on"] and d.get("reason") == "left_zone"]
    assert len(left) >= 2, "the scene must leave the due position without running"
    assert count_false_enables(trace.frames(), table, plan).frames == 0
    enabled = {f.frame_index: f.enabled for f in trace.frames()}
    for decision in left:  # off on the very frame the true tip is out (as the expected rule)
        assert not enabled[decision["frame"]], decision
