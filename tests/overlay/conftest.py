"""Factories for overlay tests: the demo plan and station outputs at chosen moments."""

from __future__ import annotations

from pathlib import Path
from typing import Any

import pytest

from stationcheck.config import load_config
from stationcheck.core.observations import PositionRef
from stationcheck.core.outputs import Guidance, Output
from stationcheck.core.plan import StationPlan

CONFIG = Path(__file__).resolve().parents[2] / "configs" / "demo_station.yaml"


@pytest.fixture(scope="session")
def plan() -> StationPlan:
    return load_config(CONFIG).to_plan()


def fastening(enabled: bool, **changes: Any) -> Output:
    """The station fastening cover screw 4 (order 2 of 6) of unit PC-000101."""
    fields: dict[str, Any] = {
        "t_s": 7.0,
        "tool_enabled": enabled,
        "guidance": Guidance("fasten", "screw_4", "Fasten cover screw 4 (order 2 of 6)."),
        "unit_status": "running",
        "serial": "PC-000101",
        "step_id": "fasten_cover",
        "step_number": 3,
        "step_count": 4,
        "target": PositionRef("fasten_cover", "screw_4"),
        "position_number": 2,
        "attempt": 1,
        "enable_reason": "tip_at_target" if enabled else "tip_not_at_target",
    }
    fields.update(changes)
    return Output(**fields)
