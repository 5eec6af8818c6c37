"""On the whole sample video (demo data), every phase change the sequencer makes is an edge the
transition table declares (``stationcheck states``)."""

from __future__ import annotations

from pathlib import Path

import pytest

from stationcheck.core.plan import StationPlan
from stationcheck.core.sequencer import Sequencer
from stationcheck.core.state import Phase
from stationcheck.core.state_graph import targets
from stationcheck.pipeline.observation_stream import read_observations
from tests.pipeline.conftest import Replay, needs_sample

pytestmark = [needs_sample, pytest.mark.slow]


def test_the_sample_changes_phase_only_along_declared_edges(
    replay: Replay, tmp_path: Path, demo_plan: StationPlan
) -> None:
    recorded = tmp_path / "observations.jsonl"
    replay(record_observations=recorded)
    sequencer = Sequencer(demo_plan)
    state = sequencer.initial_state()
    changes: set[tuple[Phase, str, Phase]] = set()
    undeclared = set()
    for observation in read_observations(recorded, demo_plan):
        before = state.phase
        state, _, _ = sequencer.step(state, observation)
        if state.phase != before:
            changes.add((before, observation.kind, state.phase))
        if state.phase not in targets(before, observation.kind):
            undeclared.add((before, observation.kind, state.phase))
    assert undeclared == set()
    # the sample's units walk these (sample_video/README.md): picks end on their timer after
    # some other input, a check passes on a verdict or fails on an acknowledge
    assert ("idle", "unit_started", "pick") in changes
    assert ("fasten", "tightening_result", "check") in changes
    assert ("check", "check_verdict", "idle") in changes
    assert ("check", "operator_ack", "idle") in changes
    assert any(a == "pick" and b == "fasten" for a, _, b in changes)
