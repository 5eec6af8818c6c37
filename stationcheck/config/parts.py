"""The usable pieces of a config, each with its place in the file, for the lint passes.

A file with a schema error in one zone still gets every other zone and step linted: entries
are taken from the raw YAML data one by one and as much of each is kept as validates on its
own (schema errors are reported separately, so nothing here reports them again).
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass
from typing import Any, TypeVar

from pydantic import BaseModel, TypeAdapter, ValidationError

from stationcheck.config.error_wording import Location
from stationcheck.config.schema import (
    STEP_ZONE_KIND,
    AddressEntry,
    BoltCircleZones,
    CameraSection,
    PointPx,
    ThresholdsSection,
    ZoneEntry,
)

_ZONE_ADAPTER: TypeAdapter[Any] = TypeAdapter(ZoneEntry)
_POLYGON_ADAPTER: TypeAdapter[list[tuple[float, float]]] = TypeAdapter(list[PointPx])
_ZONE_KINDS = ("fastener", "bin", "check")
M = TypeVar("M", bound=BaseModel)
Point = tuple[float, float]


@dataclass(frozen=True)
class LocatedZone:
    id: str
    kind: str | None  # None when the file's kind is not a valid one
    polygon_px: tuple[Point, ...] | None  # None when the points did not validate
    path: Location  # the entry: ('zones', 3) or ('zones', 3, 'bolt_circle')
    id_path: Location  # where the id (or the bolt circle's id_prefix) is written


@dataclass(frozen=True)
class LocatedStep:
    id: str | None
    kind: str
    path: Location
    zone_refs: tuple[tuple[Location, str], ...]  # (where, zone id) in the order written


@dataclass(frozen=True)
class LocatedSignal:
    name: str
    entry: AddressEntry
    path: Location


@dataclass(frozen=True)
class ConfigParts:
    zones: tuple[LocatedZone, ...]
    steps: tuple[LocatedStep, ...]
    camera: CameraSection | None
    thresholds: ThresholdsSection | None
    signals: tuple[LocatedSignal, ...]
    referenced_zone_ids: frozenset[str]  # named by any step, even one with errors
    plc_server: bool = False  # plc.mode is server (the PLC writes the input bits as coils)


def parts_of_data(data: dict[str, Any]) -> ConfigParts:
    plc = data.get("plc")
    address_map = plc.get("address_map") if isinstance(plc, dict) else None
    return ConfigParts(
        zones=tuple(_zones(_as_list(data.get("zones")))),
        steps=tuple(_steps(_as_list(data.get("steps")))),
        camera=_salvage(CameraSection, data.get("camera")),
        thresholds=_salvage(ThresholdsSection, data.get("thresholds", {})),
        signals=tuple(_signals(address_map)),
        referenced_zone_ids=frozenset(_referenced_zone_ids(_as_list(data.get("steps")))),
        plc_server=isinstance(plc, dict) and plc.get("mode") == "server",
    )


def _as_list(value: Any) -> list[Any]:
    return value if isinstance(value, list) else []


def _zones(items: list[Any]) -> Iterator[LocatedZone]:
    for index, item in enumerate(items):
        path: Location = ("zones", index)
        try:
            entry = _ZONE_ADAPTER.validate_python(item)
        except ValidationError:
            yield from _zones_of_invalid_entry(item, path)
            continue
        if isinstance(entry, BoltCircleZones):
            circle_path = path + ("bolt_circle",)
            for spec in entry.to_specs():
                yield LocatedZone(
                    spec.id, spec.kind, spec.polygon_px, circle_path, circle_path + ("id_prefix",)
                )
        else:
            for spec in entry.to_specs():
                yield LocatedZone(spec.id, spec.kind, spec.polygon_px, path, path + ("id",))


def _zones_of_invalid_entry(item: Any, path: Location) -> Iterator[LocatedZone]:
    if not isinstance(item, dict):
        return
    circle = item.get("bolt_circle")
    if isinstance(circle, dict):
        prefix, count = circle.get("id_prefix"), circle.get("count")
        if isinstance(prefix, str) and isinstance(count, int) and 0 < count <= 1000:
            circle_path = path + ("bolt_circle",)
            for number in range(1, count + 1):
                yield LocatedZone(
                    f"{prefix}{number}", "fastener", None, circle_path, circle_path + ("id_prefix",)
                )
        return
    if not isinstance(item.get("id"), str):
        return
    kind = item.get("kind") if item.get("kind") in _ZONE_KINDS else None
    try:
        polygon: tuple[Point, ...] | None = tuple(
            _POLYGON_ADAPTER.validate_python(item.get("polygon"))
        )
    except ValidationError:
        polygon = None
    yield LocatedZone(item["id"], kind, polygon, path, path + ("id",))


def _steps(items: list[Any]) -> Iterator[LocatedStep]:
    for index, item in enumerate(items):
        if not isinstance(item, dict) or not isinstance(item.get("kind"), str):
            continue
        path: Location = ("steps", index)
        refs: list[tuple[Location, str]] = []
        zones, zone = item.get("zones"), item.get("zone")
        if item["kind"] == "fasten" and isinstance(zones, list):
            refs = [(path + ("zones", j), z) for j, z in enumerate(zones) if isinstance(z, str)]
        elif item["kind"] in STEP_ZONE_KIND and isinstance(zone, str):
            refs = [(path + ("zone",), zone)]
        step_id = item.get("id") if isinstance(item.get("id"), str) else None
        yield LocatedStep(step_id, item["kind"], path, tuple(refs))


def _referenced_zone_ids(items: list[Any]) -> Iterator[str]:
    for item in items:
        if isinstance(item, dict):
            zones, zone = item.get("zones"), item.get("zone")
            if isinstance(zone, str):
                yield zone
            if isinstance(zones, list):
                yield from (z for z in zones if isinstance(z, str))


def _signals(address_map: Any) -> Iterator[LocatedSignal]:
    if not isinstance(address_map, dict):
        return
    for name, raw in address_map.items():
        try:
            entry = AddressEntry.model_validate(raw)
        except ValidationError:
            continue
        yield LocatedSignal(str(name), entry, ("plc", "address_map", str(name)))


def _salvage(model: type[M], value: Any) -> M | None:
    """The section with its unknown and invalid keys left out, or None if that fails."""
    if not isinstance(value, dict):
        return None
    kept = {key: item for key, item in value.items() if key in model.model_fields}
    for _ in range(2):
        try:
            return model.model_validate(kept)
        except ValidationError as exc:
            bad = {error["loc"][0] for error in exc.errors() if error["loc"]}
            kept = {key: item for key, item in kept.items() if key not in bad}
    return None
