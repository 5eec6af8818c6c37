"""Live validation for the page: the findings of ``stationcheck check`` plus what to draw.

Each finding keeps its path into the document (``["steps", 2, "zone"]``) so the page can show
it beside the zone or step it is about. Zones come drawn even when the file has errors, bolt
circles written out, each numbered in its fasten step's tightening order.
"""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Any

from stationcheck.config import check_data
from stationcheck.config.model_proof import proof_of_data
from stationcheck.config.parts import parts_of_data
from stationcheck.core import bolt_pattern


def check_for_page(
    data: dict[str, Any], base_dir: Path, source: str, extra: Sequence[dict[str, Any]] = ()
) -> dict[str, Any]:
    """The page's check; ``extra`` adds findings only the screen makes (teaching quality)."""
    result = check_data(data, base_dir=base_dir, source=source)
    parts = result.parts if result.parts is not None else parts_of_data(data)
    order = tightening_numbers(data)
    zones = [
        {
            "id": zone.id,
            "kind": zone.kind,
            "polygon": [list(point) for point in zone.polygon_px or ()],
            "entry": zone.path[1],
            "generated": "bolt_circle" in zone.path,
            "number": order[zone.id][0] if zone.id in order else None,
            "of": order[zone.id][1] if zone.id in order else None,
        }
        for zone in parts.zones
    ]
    findings = [
        {**finding.to_json(), "where": list(finding.path)} for finding in result.findings
    ] + list(extra)
    warnings = len(result.warnings) + sum(1 for f in extra if f["severity"] == "warning")
    summary = result.summary()
    if extra and result.ok:
        summary = f"{source}: OK with warnings: 0 errors, {warnings} warnings"
    return {
        "summary": summary,
        "model": model_badge(data, base_dir),
        "ok": result.ok,
        "errors": len(result.errors),
        "warnings": warnings,
        "findings": findings,
        "zones": zones,
    }


def model_badge(data: dict[str, Any], base_dir: Path) -> dict[str, Any]:
    """The model badge: whether the station's model is proven on the station (its fitness
    report), with the report's figures when one matches."""
    proof = proof_of_data(data, base_dir)
    if proof is None:
        return {"state": "unproven", "message": "the model file named in model.path is missing"}
    out: dict[str, Any] = {"state": proof.state, "message": proof.message}
    if proof.report is not None:
        keys = (
            "tip_median_px",
            "tip_p95_px",
            "inner_radius_px",
            "miss_rate",
            "false_detection_rate",
            "held_out_frames",
            "measured_at",
            "verdict",
        )
        out["fitness"] = {k: proof.report.get(k) for k in keys}
    return out


def tightening_numbers(data: dict[str, Any]) -> dict[str, tuple[int, int]]:
    """Fastener zone -> (its 1-based place in its fasten step's tightening order, how many the
    step fastens); the first step naming it wins."""
    numbers: dict[str, tuple[int, int]] = {}
    steps = data.get("steps")
    for step in steps if isinstance(steps, list) else []:
        if not isinstance(step, dict) or step.get("kind") != "fasten":
            continue
        zones = [z for z in step.get("zones") or [] if isinstance(z, str)]
        if step.get("order") == "cross" and zones:
            zones = bolt_pattern.apply_order(zones, bolt_pattern.cross_order(len(zones)))
        for number, zone in enumerate(zones, start=1):
            numbers.setdefault(zone, (number, len(zones)))
    return numbers


def bolt_circle_zones(request: dict[str, Any]) -> dict[str, Any]:
    """Zones for a bolt circle placed by its centre and one bolt, and their cross order.

    The clicked bolt is bolt 1; the rest follow clockwise on screen.
    """
    centre = _point(request.get("centre_px"), "centre_px")
    first = _point(request.get("first_px"), "first_px")
    count = _whole(request.get("count"), "count", 2, 128)
    size = request.get("zone_size_px", 34)
    prefix = str(request.get("id_prefix") or "bolt_")
    label_prefix = str(request.get("label_prefix") or "").strip()
    if not isinstance(size, int | float) or isinstance(size, bool) or not size > 0:
        raise ValueError("zone_size_px must be a number above 0")
    radius_px, start_deg = bolt_pattern.circle_through_px(centre, first)
    polygons = bolt_pattern.bolt_circle_zones_px(centre, radius_px, count, start_deg, size)
    ids = [f"{prefix}{n}" for n in range(1, count + 1)]
    zones = [
        {
            "id": zone_id,
            "kind": "fastener",
            **({"label": f"{label_prefix} {n}"} if label_prefix else {}),
            "polygon": [[round(x, 1), round(y, 1)] for x, y in polygon],
        }
        for n, (zone_id, polygon) in enumerate(zip(ids, polygons, strict=True), start=1)
    ]
    cross = bolt_pattern.apply_order(ids, bolt_pattern.cross_order(count))
    return {
        "zones": zones,
        "cross_order": cross,
        "radius_px": round(radius_px, 1),
        "start_angle_deg": round(start_deg, 1),
    }


def _point(value: Any, name: str) -> tuple[float, float]:
    if (
        not isinstance(value, list)
        or len(value) != 2
        or not all(isinstance(v, int | float) and not isinstance(v, bool) for v in value)
    ):
        raise ValueError(f"{name} must be [x, y]")
    return float(value[0]), float(value[1])


def _whole(value: Any, name: str, lo: int, hi: int) -> int:
    if not isinstance(value, int) or isinstance(value, bool) or not lo <= value <= hi:
        raise ValueError(f"{name} must be a whole number from {lo} to {hi}")
    return value
