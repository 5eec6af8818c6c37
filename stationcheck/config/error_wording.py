"""Plain sentences for pydantic's validation errors, and the paths they point at.

Pydantic reports e.g. ``('steps', 2, 'pick', 'zone')`` and "Input should be a valid string";
people reading a config want ``steps[2].zone: expected text, got the number 5``.
"""

from __future__ import annotations

import difflib
import types
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Annotated, Any, Union, get_args, get_origin

from pydantic import BaseModel, Tag

Location = tuple[str | int, ...]


_EXPECTED = {
    "int_type": "expected a whole number",
    "int_parsing": "expected a whole number",
    "int_from_float": "expected a whole number",
    "float_type": "expected a number",
    "float_parsing": "expected a number",
    "bool_type": "expected true or false",
    "bool_parsing": "expected true or false",
    "string_type": "expected text",
    "list_type": "expected a list ('- item' lines or [a, b])",
    "tuple_type": "expected a list ('- item' lines or [a, b])",
    "dict_type": "expected a mapping (key: value lines)",
    "model_type": "expected a mapping (key: value lines)",
    "model_attributes_type": "expected a mapping (key: value lines)",
    "finite_number": "expected a finite number",
}

_BOUNDS = {
    "greater_than": ("gt", "must be more than"),
    "greater_than_equal": ("ge", "must be at least"),
    "less_than": ("lt", "must be less than"),
    "less_than_equal": ("le", "must be at most"),
}


def describe_value(value: Any) -> str:
    """A short description of a YAML value as a reader of the file would name it."""
    if value is None:
        return "nothing (an empty value)"
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int | float):
        return f"the number {value:g}" if isinstance(value, float) else f"the number {value}"
    if isinstance(value, str):
        shown = value if len(value) <= 40 else value[:37] + "..."
        return f"the text '{shown}'"
    if isinstance(value, list | tuple):
        return f"a list of {len(value)} item{'s' if len(value) != 1 else ''}"
    if isinstance(value, dict):
        return "a mapping (key: value lines)"
    return type(value).__name__


def format_path(path: Sequence[str | int]) -> str:
    """``('steps', 2, 'zone')`` -> ``steps[2].zone``."""
    text = ""
    for part in path:
        if isinstance(part, int):
            text += f"[{part}]"
        else:
            text += f".{part}" if text else str(part)
    return text


@dataclass(frozen=True)
class PlainError:
    path: Location
    message: str


def plain_errors(root: type[BaseModel], errors: Sequence[Any]) -> list[PlainError]:
    """Turn ``ValidationError.errors()`` of ``root`` into located plain sentences."""
    return [_plain_error(root, error) for error in errors]


def _plain_error(root: type[BaseModel], error: Any) -> PlainError:
    raw_loc = tuple(error["loc"])
    key_error = bool(raw_loc) and raw_loc[-1] == "[key]"
    if key_error:
        raw_loc = raw_loc[:-1]
    path = _clean_path(root, raw_loc)
    kind = error["type"]
    value = error.get("input")
    ctx = error.get("ctx") or {}
    if kind == "extra_forbidden":
        return PlainError(path, _unknown_key(path, raw_loc, root))
    if kind == "missing":
        if path == ("format_version",):
            return PlainError(
                path, "required, but missing; start the file with 'format_version: 1'"
            )
        return PlainError(path, "required, but missing from the file")
    if kind == "invalid_key":
        return PlainError(path, f"unknown key {value!r}; keys here are names, not numbers")
    if kind == "union_tag_not_found":
        return PlainError(
            path + ("kind",),
            "missing; say which kind of step this is: " + _choices(_union_tags(root, raw_loc)),
        )
    if kind == "union_tag_invalid":
        return PlainError(
            path + ("kind",),
            f"'{ctx.get('tag')}' is not a kind of step; use " + _choices(_expected_tags(ctx)),
        )
    message = _value_message(kind, value, ctx, error.get("msg", ""))
    if kind == "too_short" and path in _EMPTY_SECTION_HINTS and not value:
        message += f": {_EMPTY_SECTION_HINTS[path]}"
    if key_error and f"'{value}'" not in message:
        message = f"the name '{value}': {message}"
    return PlainError(path, message)


_EMPTY_SECTION_HINTS = {
    ("zones",): "no zones yet; draw them on the reference frame (setup screen, Zones tab)",
    ("steps",): "no steps yet; add them in order (setup screen, Steps tab)",
}


def _value_message(kind: str, value: Any, ctx: dict[str, Any], msg: str) -> str:
    got = describe_value(value)
    if kind in _EXPECTED:
        return f"{_EXPECTED[kind]}, got {got}"
    if kind == "literal_error":
        return f"expected {ctx.get('expected', '?')}, got {got}"
    if kind in _BOUNDS:
        key, words = _BOUNDS[kind]
        return f"{words} {_number(ctx.get(key))}, got {_number(value)}"
    if kind in ("too_short", "too_long"):
        limit = ctx.get("min_length") if kind == "too_short" else ctx.get("max_length")
        words = "at least" if kind == "too_short" else "at most"
        plural = "s" if limit != 1 else ""
        return f"needs {words} {limit} item{plural}, got {ctx.get('actual_length')}"
    if msg.startswith("Value error, "):
        return msg.removeprefix("Value error, ")
    return msg


def _number(value: Any) -> str:
    return f"{value:g}" if isinstance(value, float) else str(value)


def _choices(options: Sequence[str]) -> str:
    quoted = [f"'{option}'" for option in options]
    if len(quoted) <= 1:
        return "".join(quoted)
    return ", ".join(quoted[:-1]) + " or " + quoted[-1]


def _union_tags(root: type[BaseModel], raw_loc: Location) -> list[str]:
    current: Any = root
    for part in raw_loc:
        current = _child(current, part) if current is not None else None
    current = _strip(current)
    if not _is_union(current):
        return []
    return [tag for tag in map(_tag_of, get_args(current)) if tag is not None]


def _expected_tags(ctx: dict[str, Any]) -> list[str]:
    text = str(ctx.get("expected_tags", ""))
    return [tag.strip().strip("'") for tag in text.split(",") if tag.strip()]


def _unknown_key(path: Location, raw_loc: Location, root: type[BaseModel]) -> str:
    key = str(path[-1]) if path else "?"
    allowed = _allowed_keys(root, raw_loc[:-1])
    if not allowed:
        return f"unknown key '{key}'"
    close = difflib.get_close_matches(key, allowed, n=1, cutoff=0.6)
    hint = f"; did you mean '{close[0]}'?" if close else ""
    elsewhere = _section_holding(root, key)
    if not close and elsewhere:
        hint = f"; '{key}' belongs under '{elsewhere}'"
    return f"unknown key '{key}'{hint} (allowed here: {', '.join(allowed)})"


def _section_holding(root: type[BaseModel], key: str) -> str | None:
    for name, field in root.model_fields.items():
        model = _strip(field.annotation)
        if isinstance(model, type) and issubclass(model, BaseModel) and key in model.model_fields:
            return name
    return None


def _allowed_keys(root: type[BaseModel], raw_loc: Location) -> list[str]:
    current: Any = root
    for part in raw_loc:
        current = _child(current, part)
        if current is None:
            return []
    current = _strip(current)
    if isinstance(current, type) and issubclass(current, BaseModel):
        return list(current.model_fields)
    return []


def _clean_path(root: type[BaseModel], raw_loc: Location) -> Location:
    """The location without the union tags pydantic inserts (``steps[2].fasten.zones``),
    mapping keys always as text (YAML allows ``3:`` as a key)."""
    path: list[str | int] = []
    current: Any = root
    for part in raw_loc:
        stripped = _strip(current) if current is not None else None
        is_tag = _is_union(stripped) and isinstance(part, str)
        is_key = get_origin(stripped) is dict or _is_model(stripped)
        current = _child(current, part) if current is not None else None
        if not is_tag:
            path.append(str(part) if is_key else part)
    return tuple(path)


def _strip(tp: Any) -> Any:
    """Remove Annotated wrappers and an Optional's None."""
    while True:
        origin = get_origin(tp)
        if origin is Annotated:
            tp = get_args(tp)[0]
            continue
        if _is_union(tp):
            members = [a for a in get_args(tp) if a is not type(None)]
            if len(members) == 1:
                tp = members[0]
                continue
        return tp


def _is_model(tp: Any) -> bool:
    return isinstance(tp, type) and issubclass(tp, BaseModel)


def _is_union(tp: Any) -> bool:
    return get_origin(tp) in (Union, types.UnionType)


def _child(tp: Any, part: str | int) -> Any:
    tp = _strip(tp)
    if isinstance(tp, type) and issubclass(tp, BaseModel):
        field = tp.model_fields.get(part) if isinstance(part, str) else None
        return field.annotation if field else None
    origin = get_origin(tp)
    if origin in (list, tuple):
        args = get_args(tp)
        return args[0] if args and isinstance(part, int) else None
    if origin is dict:
        return get_args(tp)[1]
    if _is_union(tp):
        for member in get_args(tp):
            if _tag_of(member) == part:
                return _strip(member)
    return None


def _tag_of(member: Any) -> str | None:
    if get_origin(member) is Annotated:
        for meta in get_args(member)[1:]:
            if isinstance(meta, Tag):
                return meta.tag
    model = _strip(member)
    if isinstance(model, type) and issubclass(model, BaseModel) and "kind" in model.model_fields:
        literal = model.model_fields["kind"].annotation
        args = get_args(literal)
        return str(args[0]) if args else None
    return None
