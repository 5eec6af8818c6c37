"""The core's step-kind table: each entry names its own plan record, and the rework rule it
declares is the one a rework pass follows."""

from __future__ import annotations

from collections.abc import Callable

import pytest

from stationcheck.core.event_kinds import UnitStarted
from stationcheck.core.plan import CheckStep, FastenStep
from stationcheck.core.step_kinds import STEP_KINDS, StepKind
from tests.core.conftest import Scenario


def test_an_entry_with_another_kinds_record_is_refused() -> None:
    with pytest.raises(ValueError, match="StepKind 'pick': its record's kind is 'check'"):
        StepKind("pick", CheckStep, "bin", "leave_out", fastens=False, timed=True,
                 guidance=("take_part",))


def test_a_rework_pass_keeps_the_steps_its_rule_says(scenario: Callable[..., Scenario]) -> None:
    sc = scenario()
    sc.unit("U-1", rework=True, positions=("s2",))
    started = next(e for e in sc.run().events if isinstance(e, UnitStarted))
    kept = [step.kind for step in started.steps]
    expected = [step.kind for step in sc.plan.steps
                if STEP_KINDS[step.kind].on_rework != "leave_out"]
    assert kept == expected == ["fasten", "check"]
    assert [p.zone for p in started.positions] == ["s2"]
    assert all(isinstance(s, FastenStep) == STEP_KINDS[s.kind].fastens for s in sc.plan.steps)
