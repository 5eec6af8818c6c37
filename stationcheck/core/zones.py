"""Which zone the tool tip is in, with hysteresis and dwell, from shapely geometry.

Membership: a point on the boundary counts as inside (as OpenCV's ``pointPolygonTest`` >= 0).
A tip enters a zone when inside it and leaves once the smoothed tip or the frame's measured tip
is more than ``hysteresis_px`` outside (the smoothing lags a tip that starts to move); until then
it stays in the zone it is in, even if it touches a neighbour. It has "arrived" once it
has stayed ``dwell_ms`` (measured on frame timestamps). Lookup goes through an STRtree over the
zones, so many zones cost little. Overlapping zones are a config error; if they occur anyway the
smallest zone containing the tip wins (ties: the first in the config), and nothing crashes.
"""

from __future__ import annotations

import logging
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np
import shapely
from shapely.geometry import Point, Polygon

from stationcheck.core.observations import ZoneObservation
from stationcheck.core.plan import StationPlan, ZoneKind, ZoneSpec
from stationcheck.core.records import ToolPose
from stationcheck.core.timing import elapsed_ms, reached
from stationcheck.core.validation import require_at_least
from stationcheck.errors import ConfigError

logger = logging.getLogger(__name__)


@dataclass(frozen=True)
class ZoneVisit:
    """The zone the tip is in and since when (one visit); empty when in no zone."""

    zone: str | None = None
    since_t_s: float | None = None


def build_polygon(spec: ZoneSpec) -> Polygon:
    """A valid shapely polygon for a zone; degenerate outlines are a :class:`ConfigError`."""
    if len(spec.polygon_px) < 3:
        raise ConfigError(
            f"zone {spec.id!r}: polygon needs at least 3 points, got {len(spec.polygon_px)}"
        )
    polygon = Polygon(spec.polygon_px)
    if not polygon.is_valid:
        logger.warning("zone %r: polygon is not simple; using its repaired outline", spec.id)
        repaired = shapely.make_valid(polygon)
        parts = [g for g in getattr(repaired, "geoms", [repaired]) if isinstance(g, Polygon)]
        polygon = max(parts, key=lambda g: g.area) if parts else Polygon()
    if polygon.area <= 0.0:
        raise ConfigError(f"zone {spec.id!r}: polygon must enclose an area > 0, got 0")
    return polygon


class ZoneMap:
    """Zone geometry plus the pure :meth:`observe` step; holds no per-frame state itself."""

    def __init__(self, zones: Sequence[ZoneSpec], *, hysteresis_px: float, dwell_ms: float) -> None:
        require_at_least("ZoneMap", "hysteresis_px", hysteresis_px, 0.0)
        require_at_least("ZoneMap", "dwell_ms", dwell_ms, 0.0)
        ids = [zone.id for zone in zones]
        duplicates = sorted({zone_id for zone_id in ids if ids.count(zone_id) > 1})
        if duplicates:
            raise ConfigError(f"zone ids must be unique, got duplicates {duplicates}")
        self.hysteresis_px = float(hysteresis_px)
        self.dwell_ms = float(dwell_ms)
        self.zone_ids: tuple[str, ...] = tuple(ids)
        self._kinds: dict[str, ZoneKind] = {zone.id: zone.kind for zone in zones}
        self._index = {zone_id: i for i, zone_id in enumerate(ids)}
        self._polygons = np.array([build_polygon(zone) for zone in zones], dtype=object)
        shapely.prepare(self._polygons)
        self._areas = [float(p.area) for p in self._polygons]
        self._tree = shapely.STRtree(self._polygons)
        self._warn_overlaps()

    @classmethod
    def from_plan(cls, plan: StationPlan, kinds: Iterable[ZoneKind] = ("fastener",)) -> ZoneMap:
        """The tip only means something at fastener zones; other kinds can be asked for."""
        wanted = set(kinds)
        return cls(
            [zone for zone in plan.zones if zone.kind in wanted],
            hysteresis_px=plan.thresholds.hysteresis_px,
            dwell_ms=plan.thresholds.dwell_ms,
        )

    def kind_of(self, zone_id: str) -> ZoneKind:
        return self._kinds[zone_id]

    def zones_at(self, point_px: tuple[float, float]) -> tuple[str, ...]:
        """Zones containing the point (boundary included), smallest first, then config order."""
        hits = self._tree.query(Point(point_px), predicate="intersects")
        order = sorted((self._areas[int(i)], int(i)) for i in hits)
        return tuple(self.zone_ids[i] for _, i in order)

    def signed_distance_px(self, zone_id: str, point_px: tuple[float, float]) -> float:
        """Distance to the zone outline: positive inside, negative outside, 0 on it (the sign
        convention of OpenCV's ``pointPolygonTest`` with ``measureDist``)."""
        polygon = self._polygons[self._index[zone_id]]
        point = Point(point_px)
        distance = float(shapely.distance(polygon.exterior, point))
        return distance if shapely.intersects(polygon, point) else -distance

    def initial_state(self) -> ZoneVisit:
        return ZoneVisit()

    def observe(
        self, state: ZoneVisit, pose: ToolPose, frame_age_ms: float = 0.0
    ) -> tuple[ZoneVisit, ZoneObservation]:
        if not pose.visible or pose.tip_px is None:
            state = ZoneVisit()
        else:
            state = self._visit(state, pose.tip_px, pose.t_s, pose.measured_tip_px)
        dwell_ms = 0.0
        if state.since_t_s is not None:
            dwell_ms = max(0.0, elapsed_ms(state.since_t_s, pose.t_s))
        arrived = (
            state.zone if state.zone is not None and reached(dwell_ms, self.dwell_ms) else None
        )
        return state, ZoneObservation(
            t_s=pose.t_s,
            frame_index=pose.frame_index,
            zone=state.zone,
            arrived_zone=arrived,
            since_t_s=state.since_t_s,
            dwell_ms=dwell_ms,
            visible=pose.visible,
            tip_px=pose.tip_px,
            frame_age_ms=frame_age_ms,
            seen=pose.seen,
        )

    def _visit(
        self,
        state: ZoneVisit,
        tip_px: tuple[float, float],
        t_s: float,
        measured_px: tuple[float, float] | None = None,
    ) -> ZoneVisit:
        """A visit goes on while the smoothed tip and this frame's measured tip (when seen)
        are both within the hysteresis: the smoothing lags a tip that starts to move, and a
        tip that truly left must not keep the enable for that lag."""
        if (
            state.zone is not None
            and state.zone in self._index
            and -self.signed_distance_px(state.zone, tip_px) <= self.hysteresis_px
            and (
                measured_px is None
                or -self.signed_distance_px(state.zone, measured_px) <= self.hysteresis_px
            )
        ):
            return state
        inside = self.zones_at(tip_px)
        if not inside:
            return ZoneVisit()
        return ZoneVisit(zone=inside[0], since_t_s=t_s)

    def _warn_overlaps(self) -> None:
        left, right = self._tree.query(self._polygons, predicate="intersects")
        for i, j in zip(left.tolist(), right.tolist(), strict=True):
            if i < j and shapely.intersection(self._polygons[i], self._polygons[j]).area > 0.0:
                logger.warning(
                    "zones %r and %r overlap; the smaller one wins where both apply",
                    self.zone_ids[i],
                    self.zone_ids[j],
                )
