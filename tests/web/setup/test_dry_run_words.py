"""Dry-run timeline lines: the fastener named by its zone, its place in the step as "order N",
and no empty details."""

from __future__ import annotations

import pytest

from stationcheck.core import event_kinds as ev
from stationcheck.core.events import Event
from stationcheck.web.setup.dry_run import describe_event
from tests.event_examples import alarm, tightening, unit_ended


@pytest.mark.parametrize(("event", "text"), [
    (ev.PositionCompleted(1.0, "PC-1", step="cover", zone="screw_4", position=2, attempts=1,
                          rework=False),
     "PC-1: position completed (screw_4, order 2 of step cover)"),
    (tightening(1.0, "PC-1", zone="screw_4", result="NotOK"),
     "PC-1: tightening result (screw_4, order 1 of step fasten, attempt 1, result NotOK)"),
    (alarm(1.0, None, code="tool_lost"), "alarm raised (code tool_lost)"),
    (alarm(1.0, None, code="wrong_bin", step="pick_gasket"),
     "alarm raised (step pick_gasket, code wrong_bin)"),
    (unit_ended(1.0, "PC-2", result="NotOK"), "PC-2: unit ended (result NotOK, released False)"),
])
def test_timeline_lines_read_cleanly(event: Event, text: str) -> None:
    assert describe_event(event)["text"] == text
