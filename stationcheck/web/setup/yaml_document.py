"""The config file as the engineer wrote it, edited in place so a save keeps its comments.

The page holds the whole document as plain JSON and sends it back whole. :func:`merge_into`
carries those values into the ruamel.yaml round-trip tree: values that did not change keep
their node (and so their comments, quoting, number spelling and flow style); list items are
matched by ``id`` so a moved step keeps its own comments; new keys go in the schema's order.
"""

from __future__ import annotations

import io
from pathlib import Path
from typing import Any

from pydantic import BaseModel
from ruamel.yaml import YAML
from ruamel.yaml.comments import CommentedMap, CommentedSeq
from ruamel.yaml.error import YAMLError

from stationcheck.config import schema, yaml_text
from stationcheck.errors import ConfigError

Key = str | int

# mapping key -> the model giving the order of its keys (list items: see _item_model)
_SECTION_MODELS: dict[str, type[BaseModel]] = {
    "station": schema.StationSection,
    "camera": schema.CameraSection,
    "model": schema.ModelSection,
    "thresholds": schema.ThresholdsSection,
    "plc": schema.PlcSection,
    "log": schema.LogSection,
    "judgements": schema.JudgementsSection,
    "bolt_circle": schema.BoltCircle,
    "torque_nm": schema.LimitsSection,
    "angle_deg": schema.LimitsSection,
    "bin_activity": schema.BinActivitySection,
    "presence": schema.PresenceSection,
    "camera_shift": schema.CameraShiftSection,
}
_STEP_MODELS: dict[str, type[BaseModel]] = dict(schema.STEP_SECTIONS)
_FLOW_MAPS = {"torque_nm", "angle_deg"}


def new_yaml() -> YAML:
    """The round-trip reader/writer in the house style (2-space maps, '- ' lists inset by 2),
    YAML 1.2 with the limits of :mod:`stationcheck.config.yaml_text`."""
    yaml = yaml_text.round_trip()
    yaml.preserve_quotes = True
    yaml.width = 4096
    yaml.indent(mapping=2, sequence=4, offset=2)
    return yaml


def load_text(text: str, name: str) -> CommentedMap:
    yaml_text.compose(text, name)  # the limits, before anything is built
    try:
        data = new_yaml().load(text)
    except YAMLError as exc:
        raise ConfigError(f"{name}: not valid YAML ({exc})") from exc
    if data is None:
        return CommentedMap()
    if not isinstance(data, CommentedMap):
        raise ConfigError(f"{name}: the top level must be a mapping of keys")
    return data


def load_file(path: Path) -> CommentedMap:
    try:
        text = path.read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as exc:
        raise ConfigError(f"{path}: cannot be read ({exc})") from exc
    return load_text(text, str(path))


def dump_text(document: CommentedMap) -> str:
    out = io.StringIO()
    new_yaml().dump(document, out)
    return out.getvalue()


def to_plain(value: Any) -> Any:
    """JSON-ready copy of a round-trip tree (ruamel scalars become plain numbers/strings)."""
    if isinstance(value, dict):
        return {str(k): to_plain(v) for k, v in value.items()}
    if isinstance(value, list):
        return [to_plain(v) for v in value]
    if isinstance(value, bool) or value is None:
        return value
    if isinstance(value, int):
        return int(value)
    if isinstance(value, float):
        return float(value)
    return str(value)


def new_document(reference_frame: str) -> CommentedMap:
    """A starting point for a new station: one camera, no zones and no steps yet."""
    document = CommentedMap()
    merge_into(
        document,
        {
            "format_version": schema.FORMAT_VERSION,
            "station": {"name": "New station", "reference_frame": reference_frame},
            "camera": {"source": 0, "width_px": 640, "height_px": 480, "fps": 30},
            "thresholds": {
                "dwell_ms": 200,
                "lost_track_grace_ms": 300,
                "hysteresis_px": 4,
                "stale_frame_ms": 100,
            },
            "zones": [],
            "steps": [],
        },
    )
    document.yaml_set_start_comment(
        "stationcheck station config, written by 'stationcheck setup'.\n"
        "Zones are in the reference frame's pixels (x right, y down); paths are relative to "
        "this file."
    )
    return document


def merge_into(target: CommentedMap, new: dict[str, Any], path: tuple[Key, ...] = ()) -> None:
    """Make ``target`` equal ``new``, keeping every node whose value did not change."""
    for key in [k for k in target if k not in new]:
        del target[key]
    order = _key_order(path, new)
    for key, value in new.items():
        if key in target:
            target[key] = _merged(target[key], value, path + (key,))
        else:
            target.insert(_insert_at(target, key, order), key, _node(value, path + (key,)))


def _merged(old: Any, new: Any, path: tuple[Key, ...]) -> Any:
    if isinstance(old, CommentedMap) and isinstance(new, dict):
        merge_into(old, new, path)
        return old
    if isinstance(old, CommentedSeq) and isinstance(new, list):
        if to_plain(old) == new:
            return old
        if (
            new
            and all(isinstance(item, dict) for item in new)
            and all(isinstance(item, CommentedMap) for item in old)
        ):
            if old.fa.flow_style():
                old.fa.set_block_style()
            _merge_items(old, new, path)
            return old
        replacement = _node(new, path)
        if isinstance(replacement, CommentedSeq) and old.fa.flow_style():
            _set_flow(replacement)
        return replacement
    if _same_scalar(old, new):
        return old
    return _node(new, path)


def _merge_items(old: CommentedSeq, new: list[dict[str, Any]], path: tuple[Key, ...]) -> None:
    """An item keeps its node when its identity (id, or bolt circle prefix) is still there, or,
    renamed, when it stays at its place and its old identity is gone."""
    wanted = {_identity(item) for item in new}
    available = {_identity(item): item for item in old if _identity(item) is not None}
    merged: list[Any] = []
    for index, item in enumerate(new):
        identity = _identity(item)
        previous = available.pop(identity, None) if identity is not None else None
        if previous is None and index < len(old):
            candidate, old_identity = old[index], _identity(old[index])
            if old_identity is None or (
                old_identity not in wanted and available.get(old_identity) is candidate
            ):
                previous = candidate
                available.pop(old_identity, None)
        if previous is not None:
            merge_into(previous, item, path + (index,))
            merged.append(previous)
        else:
            merged.append(_node(item, path + (index,)))
    del old[len(merged) :]
    for index, item in enumerate(merged):
        if index < len(old):
            if old[index] is not item:
                old[index] = item
        else:
            old.append(item)


def _identity(item: Any) -> str | None:
    if not isinstance(item, dict):
        return None
    if isinstance(item.get("id"), str):
        return f"id:{item['id']}"
    circle = item.get("bolt_circle")
    if isinstance(circle, dict) and isinstance(circle.get("id_prefix"), str):
        return f"circle:{circle['id_prefix']}"
    return None


def _same_scalar(old: Any, new: Any) -> bool:
    if isinstance(old, dict | list) or isinstance(new, dict | list):
        return False
    if isinstance(old, bool) or isinstance(new, bool):
        return isinstance(old, bool) and isinstance(new, bool) and old == new
    if isinstance(old, int | float) and isinstance(new, int | float):
        return bool(old == new)
    if isinstance(old, str) and isinstance(new, str):
        return str(old) == new
    return old is None and new is None


def _node(value: Any, path: tuple[Key, ...]) -> Any:
    """A new round-trip node for ``value``, keys in schema order, short lists on one line."""
    if isinstance(value, dict):
        mapping = CommentedMap()
        merge_into(mapping, value, path)
        if (
            path
            and path[-1] in _FLOW_MAPS
            and not any(isinstance(v, dict | list) for v in value.values())
        ):
            mapping.fa.set_flow_style()
        return mapping
    if isinstance(value, list):
        seq = CommentedSeq(_node(item, path + (index,)) for index, item in enumerate(value))
        if value and all(not isinstance(item, dict) for item in value):
            _set_flow(seq)
        return seq
    if isinstance(value, float) and value.is_integer() and abs(value) < 1e15:
        return int(value)
    return value


def _set_flow(seq: CommentedSeq) -> None:
    seq.fa.set_flow_style()
    for item in seq:
        if isinstance(item, CommentedSeq):
            _set_flow(item)


def _key_order(path: tuple[Key, ...], value: dict[str, Any]) -> list[str]:
    model = _model_at(path, value)
    return list(model.model_fields) if model is not None else []


def _model_at(path: tuple[Key, ...], value: dict[str, Any]) -> type[BaseModel] | None:
    if not path:
        return schema.StationConfig
    last = path[-1]
    if isinstance(last, str):
        return _SECTION_MODELS.get(last)
    parent = path[-2] if len(path) >= 2 else None
    if parent == "steps":
        return _STEP_MODELS.get(str(value.get("kind")))
    if parent == "zones":
        return schema.BoltCircleZones if "bolt_circle" in value else schema.PolygonZone
    return None


def _insert_at(target: CommentedMap, key: str, order: list[str]) -> int:
    """Before the first existing key that the schema lists after ``key``; else at the end."""
    if key not in order:
        return len(target)
    rank = order.index(key)
    for position, existing in enumerate(target):
        if existing in order and order.index(existing) > rank:
            return position
    return len(target)
