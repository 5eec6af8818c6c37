"""The setup dry run's timeline says how good the camera picture is."""

from __future__ import annotations

from stationcheck.config import load_config
from stationcheck.core.observations import PictureState
from stationcheck.demo_station.files import DEMO_CONFIG
from stationcheck.pipeline.decision_core import DecisionCore
from stationcheck.web.setup.dry_run import DryRunRecorder


def test_picture_states_appear_in_the_timeline() -> None:
    plan = load_config(DEMO_CONFIG).to_plan()
    decisions = DecisionCore(plan)
    recorder = DryRunRecorder(plan, every=1)
    recorder.on_step(decisions.apply(PictureState(0.0, True, True, brightness=110.0,
                                                  noise_sigma=1.9, blockiness=1.0)))
    recorder.on_step(decisions.apply(PictureState(0.5, False, False, "too dark",
                                                  brightness=9.0)))
    pictures = [e for e in recorder.timeline if e["kind"] == "picture"]
    assert [e["t_s"] for e in pictures] == [0.0, 0.5]
    assert "good enough to judge" in pictures[0]["text"] and "noise 1.9" in pictures[0]["text"]
    assert "too poor to check the camera (too dark)" in pictures[1]["text"]
    raised = [e["text"] for e in recorder.timeline if e["kind"] == "alarm_raised"]
    assert any("cannot_judge" in text for text in raised)
