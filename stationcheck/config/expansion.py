"""A config's zones and steps written out in full, for ``stationcheck check --expand``.

Bolt circles become one zone entry each and ``order: cross`` becomes the explicit tightening
order, so the output can be pasted into a config and adjusted zone by zone.
"""

from __future__ import annotations

from typing import Any

import yaml

from stationcheck.config.schema import StationConfig
from stationcheck.core.plan import FastenStep, Limits


class _Flow(list[Any]):
    """A list written on one line: [a, b, c]."""


class _FlowMap(dict[str, Any]):
    """A mapping written on one line: {low: 1, high: 2}."""


class _Dumper(yaml.SafeDumper):  # type: ignore[misc]  # PyYAML has no type stubs here
    pass


def _represent_flow(dumper: yaml.SafeDumper, data: _Flow) -> yaml.Node:
    return dumper.represent_sequence("tag:yaml.org,2002:seq", data, flow_style=True)


def _represent_flow_map(dumper: yaml.SafeDumper, data: _FlowMap) -> yaml.Node:
    return dumper.represent_mapping("tag:yaml.org,2002:map", data, flow_style=True)


def _represent_float(dumper: yaml.SafeDumper, data: float) -> yaml.Node:
    if data.is_integer():
        return dumper.represent_int(int(data))
    return dumper.represent_float(data)


_Dumper.add_representer(_Flow, _represent_flow)
_Dumper.add_representer(_FlowMap, _represent_flow_map)
_Dumper.add_representer(float, _represent_float)


def expanded_sections(config: StationConfig) -> dict[str, Any]:
    """``zones`` and ``steps`` as plain data, bolt circles and orders resolved."""
    plan = config.to_plan()
    zones = [
        {
            "id": zone.id,
            "kind": zone.kind,
            **({"label": zone.label} if zone.label else {}),
            "polygon": _Flow(_Flow(point) for point in zone.polygon_px),
        }
        for zone in plan.zones
    ]
    steps = []
    for step in plan.steps:
        entry: dict[str, Any] = {"id": step.id, "kind": step.kind}
        if isinstance(step, FastenStep):
            entry["zones"] = _Flow(step.zones)
            entry["max_attempts"] = step.max_attempts
            entry["on_failure"] = step.on_failure
            for name in ("torque_nm", "angle_deg"):
                limits: Limits | None = getattr(step, name)
                if limits is not None:
                    entry[name] = _FlowMap(low=limits.low, high=limits.high)
        else:
            entry.update(
                {k: v for k, v in vars(step).items() if k not in ("id", "kind")}
            )
        steps.append(entry)
    return {"zones": zones, "steps": steps}


def expanded_yaml(config: StationConfig) -> str:
    return str(yaml.dump(expanded_sections(config), Dumper=_Dumper, sort_keys=False,
                     allow_unicode=True, width=4096))
