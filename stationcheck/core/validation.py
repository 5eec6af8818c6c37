"""Small checks records run on construction; messages say what was expected and what came."""

from __future__ import annotations

import math
from collections.abc import Collection


def require_finite(record: str, field: str, value: float) -> None:
    if not isinstance(value, int | float) or isinstance(value, bool) or not math.isfinite(value):
        raise ValueError(f"{record}.{field} must be a finite number, got {value!r}")


def require_optional_finite(record: str, field: str, value: float | None) -> None:
    if value is not None:
        require_finite(record, field, value)


def require_at_least(record: str, field: str, value: float, low: float) -> None:
    require_finite(record, field, value)
    if value < low:
        raise ValueError(f"{record}.{field} must be >= {low}, got {value!r}")


def require_text(record: str, field: str, value: str) -> None:
    if not isinstance(value, str) or not value.strip():
        raise ValueError(f"{record}.{field} must be a non-empty string, got {value!r}")


def require_bool(record: str, field: str, value: bool) -> None:
    if value is not True and value is not False:
        raise ValueError(f"{record}.{field} must be true or false, got {value!r}")


def require_one_of(record: str, field: str, value: str, allowed: Collection[str]) -> None:
    if value not in allowed:
        raise ValueError(f"{record}.{field} must be one of {sorted(allowed)}, got {value!r}")


def require_point(record: str, field: str, value: tuple[float, float] | None) -> None:
    if value is None:
        return
    if not isinstance(value, tuple) or len(value) != 2:
        raise ValueError(f"{record}.{field} must be an (x, y) pair or None, got {value!r}")
    require_finite(record, f"{field}[0]", value[0])
    require_finite(record, f"{field}[1]", value[1])
