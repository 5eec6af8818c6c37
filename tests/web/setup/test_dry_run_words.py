"""Dry-run timeline lines: the fastener named by its zone, its place in the step as "order N",
and no empty details."""

from __future__ import annotations

from typing import Any

import pytest

from stationcheck.core.events import Event
from stationcheck.web.setup.dry_run import describe_event


@pytest.mark.parametrize(("kind", "serial", "data", "text"), [
    ("position_completed", "PC-1", {"zone": "screw_4", "step": "cover", "position": 2,
                               "attempt": 1, "result": "OK"},
     "PC-1: position completed (screw_4, order 2 of step cover, attempt 1, result OK)"),
    ("alarm_raised", None, {"code": "tool_lost", "subject": ""},
     "alarm raised (code tool_lost)"),
    ("alarm_raised", None, {"code": "wrong_bin", "subject": None, "step": "pick_gasket"},
     "alarm raised (step pick_gasket, code wrong_bin)"),
    ("unit_ended", "PC-2", {}, "PC-2: unit ended"),
])
def test_timeline_lines_read_cleanly(kind: str, serial: str | None, data: dict[str, Any],
                                     text: str) -> None:
    event = Event(t_s=1.0, kind=kind, serial=serial, data=data)
    assert describe_event(event)["text"] == text
