"""A config's zones and steps written out in full, for ``stationcheck check --expand``.

Bolt circles become one zone entry each and ``order: cross`` becomes the explicit tightening
order, so the output can be pasted into a config and adjusted zone by zone.
"""

from __future__ import annotations

from typing import Any

from stationcheck.config.schema import StationConfig
from stationcheck.config.yaml_text import dump_text, flow_list, flow_map
from stationcheck.core.plan import FastenStep, Limits


def expanded_sections(config: StationConfig) -> dict[str, Any]:
    """``zones`` and ``steps`` as plain data, bolt circles and orders resolved."""
    plan = config.to_plan()
    zones = [
        {
            "id": zone.id,
            "kind": zone.kind,
            **({"label": zone.label} if zone.label else {}),
            "polygon": flow_list(flow_list(point) for point in zone.polygon_px),
        }
        for zone in plan.zones
    ]
    steps = []
    for step in plan.steps:
        entry: dict[str, Any] = {"id": step.id, "kind": step.kind}
        if isinstance(step, FastenStep):
            entry["zones"] = flow_list(step.zones)
            entry["max_attempts"] = step.max_attempts
            entry["on_failure"] = step.on_failure
            for name in ("torque_nm", "angle_deg"):
                limits: Limits | None = getattr(step, name)
                if limits is not None:
                    entry[name] = flow_map({"low": limits.low, "high": limits.high})
        else:
            entry.update({k: v for k, v in vars(step).items() if k not in ("id", "kind")})
        steps.append(entry)
    return {"zones": zones, "steps": steps}


def expanded_yaml(config: StationConfig) -> str:
    return dump_text(expanded_sections(config))
