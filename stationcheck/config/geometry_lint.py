"""Geometry checks of the zones, with shapely.

Rules (E = error, W = warning):

* E a zone with fewer than 3 distinct points, no area, or an outline that crosses itself.
* E a zone entirely outside the camera frame; W a zone partly outside it.
* E two fastener zones that overlap (the tip would be at two positions at once);
  W two bin zones that overlap (a reach into the overlap counts as a pick in both).
* Hysteresis: a tip leaves a zone only once it is ``hysteresis_px`` outside it, and the margin
  is sized to the tip's jitter. E a fastener zone whose largest inscribed circle has a radius
  of at most ``hysteresis_px`` (the tip cannot be held inside it reliably); W at most twice
  ``hysteresis_px`` (marginal). W two fastener zones closer than ``hysteresis_px``, touching
  included: the tip would still count as in the first when it reaches the second.
"""

from __future__ import annotations

import math

import shapely
from shapely import STRtree
from shapely.geometry import MultiPoint, Polygon, box

from stationcheck.config.error_wording import Location
from stationcheck.config.findings import Finding, error, warning
from stationcheck.config.parts import ConfigParts, LocatedZone

_AREA_EPS_PX2 = 1e-6
_MAX_COORD_PX = 1e6


def lint_geometry(parts: ConfigParts) -> list[Finding]:
    findings: list[Finding] = []
    shapes: list[tuple[LocatedZone, Polygon]] = []
    for zone in parts.zones:
        if zone.polygon_px is None:
            continue
        problem = _shape_problem(zone, zone.polygon_px)
        if problem is not None:
            findings.append(problem)
            continue
        shape = Polygon(zone.polygon_px)
        shapes.append((zone, shape))
        if parts.camera is not None:
            findings.extend(
                _frame_findings(zone, shape, parts.camera.width_px, parts.camera.height_px)
            )
    findings.extend(_overlap_findings(shapes))
    if parts.thresholds is not None and parts.thresholds.hysteresis_px > 0:
        findings.extend(_hysteresis_findings(shapes, parts.thresholds.hysteresis_px))
    return findings


def _name(zone: LocatedZone) -> str:
    return f"zone '{zone.id}'"


def _shape_problem(zone: LocatedZone, points: tuple[tuple[float, float], ...]) -> Finding | None:
    where = zone.path + ("polygon",) if zone.path[-1] != "bolt_circle" else zone.path
    if not all(math.isfinite(v) and abs(v) <= _MAX_COORD_PX for point in points for v in point):
        return error(
            where,
            f"{_name(zone)} has a point that is not a pixel position (each "
            f"coordinate a finite number within ±{_MAX_COORD_PX:g})",
        )
    distinct = len(set(points))
    if distinct < 3:
        return error(
            where,
            f"{_name(zone)} has {distinct} distinct point"
            f"{'' if distinct == 1 else 's'}; a zone needs at least 3",
        )
    if MultiPoint(points).convex_hull.area <= _AREA_EPS_PX2:
        return error(where, f"{_name(zone)} has no area: all its points lie on one line")
    shape = Polygon(points)
    if not shape.is_valid:
        reason = shapely.is_valid_reason(shape)
        if reason.startswith(("Self-intersection", "Ring Self-intersection")):
            x, y = _reason_point(reason)
            return error(
                where,
                f"{_name(zone)} has an outline that crosses itself near "
                f"({x:g}, {y:g}); list the points in order around the zone",
            )
        return error(where, f"{_name(zone)} is not a simple polygon ({reason})")
    return None


def _reason_point(reason: str) -> tuple[float, float]:
    inside = reason[reason.find("[") + 1 : reason.find("]")].split()
    try:
        return round(float(inside[0]), 1), round(float(inside[1]), 1)
    except (IndexError, ValueError):
        return float("nan"), float("nan")


def _frame_findings(
    zone: LocatedZone, shape: Polygon, width_px: int, height_px: int
) -> list[Finding]:
    frame = box(0, 0, width_px, height_px)
    size = f"{width_px}x{height_px} px camera frame"
    inside_px2 = shape.intersection(frame).area
    if inside_px2 <= _AREA_EPS_PX2:
        return [error(zone.path, f"{_name(zone)} lies entirely outside the {size}")]
    if not frame.covers(shape):
        outside_pct = 100.0 * (1.0 - inside_px2 / shape.area)
        return [
            warning(
                zone.path,
                f"{_name(zone)} reaches outside the {size} "
                f"({outside_pct:.0f}% of its area); the tip is never seen there",
            )
        ]
    return []


def _near_pairs(
    shapes: list[tuple[LocatedZone, Polygon]], distance_px: float
) -> list[tuple[int, int]]:
    """Index pairs ``(i, j)``, ``j < i``, of shapes closer than ``distance_px`` (touching
    included), from a spatial index (shapely STRtree): near-linear in the number of zones."""
    if len(shapes) < 2:
        return []
    geometries = [shape for _, shape in shapes]
    tree = STRtree(geometries)
    if distance_px > 0:
        found = tree.query(geometries, predicate="dwithin", distance=distance_px)
    else:
        found = tree.query(geometries, predicate="intersects")
    return sorted((int(i), int(j)) for i, j in zip(found[0], found[1], strict=True) if j < i)


def _overlap_findings(shapes: list[tuple[LocatedZone, Polygon]]) -> list[Finding]:
    findings: list[Finding] = []
    for i, j in _near_pairs(shapes, 0.0):
        (zone, shape), (other, other_shape) = shapes[i], shapes[j]
        if zone.kind != other.kind or zone.kind not in ("fastener", "bin"):
            continue
        overlap_px2 = shape.intersection(other_shape).area
        if overlap_px2 <= _AREA_EPS_PX2:
            continue
        if zone.kind == "fastener":
            findings.append(
                error(
                    zone.path,
                    (
                        f"{_name(zone)} overlaps fastener zone '{other.id}' by "
                        f"{overlap_px2:.0f} px²; a tip there would be at two positions at once"
                    ),
                )
            )
        else:
            findings.append(
                warning(
                    zone.path,
                    (
                        f"{_name(zone)} overlaps bin zone '{other.id}' by {overlap_px2:.0f} "
                        "px²; a reach into the overlap counts as a pick from both bins"
                    ),
                )
            )
    return findings


def _hysteresis_findings(
    shapes: list[tuple[LocatedZone, Polygon]], hysteresis_px: float
) -> list[Finding]:
    fasteners = [(zone, shape) for zone, shape in shapes if zone.kind == "fastener"]
    findings = _size_findings(fasteners, hysteresis_px)
    for i, j in _near_pairs(fasteners, hysteresis_px):
        (zone, shape), (other, other_shape) = fasteners[i], fasteners[j]
        gap_px = shape.distance(other_shape)
        overlapping = shape.intersection(other_shape).area > _AREA_EPS_PX2
        if gap_px < hysteresis_px and not overlapping:
            findings.append(
                warning(
                    zone.path,
                    (
                        f"{_name(zone)} is only {gap_px:.1f} px from fastener zone "
                        f"'{other.id}', less than hysteresis_px ({hysteresis_px:g}); the tip "
                        f"would still count as at '{other.id}' when it reaches this one"
                    ),
                )
            )
    return findings


def _size_findings(
    fasteners: list[tuple[LocatedZone, Polygon]], hysteresis_px: float
) -> list[Finding]:
    """One finding per entry: the zones of a bolt circle share their size."""
    findings: list[Finding] = []
    ids_by_entry: dict[Location, list[str]] = {}
    for zone, _ in fasteners:
        ids_by_entry.setdefault(zone.path, []).append(zone.id)
    checked: set[Location] = set()
    for zone, shape in fasteners:
        if zone.path in checked:
            continue
        checked.add(zone.path)
        ids = ids_by_entry[zone.path]
        subject = _name(zone) + " is" if len(ids) == 1 else f"zones {ids[0]} to {ids[-1]} are"
        radius_px = shapely.maximum_inscribed_circle(shape).length
        sizes = f"inscribed radius {radius_px:.1f} px, hysteresis_px {hysteresis_px:g}"
        if radius_px <= hysteresis_px:
            findings.append(
                error(
                    zone.path,
                    (
                        f"{subject} too small for the hysteresis ({sizes}); the tip cannot be held "
                        "inside reliably: make the zone bigger or lower hysteresis_px"
                    ),
                )
            )
        elif radius_px <= 2 * hysteresis_px:
            findings.append(
                warning(
                    zone.path,
                    (
                        f"{subject} small for the hysteresis ({sizes}); an inscribed radius above "
                        "twice hysteresis_px holds the tip reliably"
                    ),
                )
            )
    return findings
