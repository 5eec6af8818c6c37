"""Reading JSON-lines files (station inputs, expected decisions, observation recordings) with
one clear error that names the file and line."""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from stationcheck.errors import InputFileError

MAX_LINE_CHARS = 64 * 1024
MAX_DEPTH = 32


def nests_deeper(value: Any, limit: int) -> bool:
    """True when lists and objects in ``value`` nest deeper than ``limit`` (no recursion)."""
    stack: list[tuple[Any, int]] = [(value, 1)]
    while stack:
        item, depth = stack.pop()
        if isinstance(item, dict | list):
            if depth > limit:
                return True
            children = item.values() if isinstance(item, dict) else item
            stack.extend((child, depth + 1) for child in children)
    return False


def read_json_lines(path: Path, what: str) -> Iterator[tuple[str, dict[str, Any]]]:
    """``(where, object)`` for every non-empty line; ``where`` is ``"path:line"`` for messages.

    Raises:
        InputFileError: the file is missing or unreadable, or a line is not a JSON object,
            is longer than :data:`MAX_LINE_CHARS` or nests deeper than :data:`MAX_DEPTH`.
    """
    try:
        with open(path, encoding="utf-8") as handle:
            for number, line in enumerate(
                iter(lambda: handle.readline(MAX_LINE_CHARS + 1), ""), start=1
            ):
                where = f"{path}:{number}"
                if len(line) > MAX_LINE_CHARS:
                    raise InputFileError(
                        f"{where}: a line longer than {MAX_LINE_CHARS} "
                        "characters; one record per line"
                    )
                if not line.strip():
                    continue
                try:
                    data = json.loads(line)
                except json.JSONDecodeError as exc:
                    raise InputFileError(f"{where}: not valid JSON ({exc.msg})") from exc
                except RecursionError as exc:
                    raise InputFileError(f"{where}: nested deeper than {MAX_DEPTH} levels") from exc
                if nests_deeper(data, MAX_DEPTH):
                    raise InputFileError(f"{where}: nested deeper than {MAX_DEPTH} levels")
                if not isinstance(data, dict):
                    raise InputFileError(
                        f"{where}: expected a JSON object, got {type(data).__name__}"
                    )
                yield where, data
    except FileNotFoundError as exc:
        raise InputFileError(f"{what} file not found: {path}") from exc
    except (OSError, UnicodeDecodeError) as exc:
        raise InputFileError(f"cannot read {what} {path}: {exc}") from exc
