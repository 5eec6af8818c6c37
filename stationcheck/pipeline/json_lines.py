"""Reading JSON-lines files (station inputs, expected decisions, observation recordings) with
one clear error that names the file and line."""

from __future__ import annotations

import json
from collections.abc import Iterator
from pathlib import Path
from typing import Any

from stationcheck.errors import InputFileError


def read_json_lines(path: Path, what: str) -> Iterator[tuple[str, dict[str, Any]]]:
    """``(where, object)`` for every non-empty line; ``where`` is ``"path:line"`` for messages.

    Raises:
        InputFileError: the file is missing or unreadable, or a line is not a JSON object.
    """
    try:
        with open(path, encoding="utf-8") as handle:
            for number, line in enumerate(handle, start=1):
                if not line.strip():
                    continue
                where = f"{path}:{number}"
                try:
                    data = json.loads(line)
                except json.JSONDecodeError as exc:
                    raise InputFileError(f"{where}: not valid JSON ({exc.msg})") from exc
                if not isinstance(data, dict):
                    raise InputFileError(
                        f"{where}: expected a JSON object, got {type(data).__name__}"
                    )
                yield where, data
    except FileNotFoundError as exc:
        raise InputFileError(f"{what} file not found: {path}") from exc
    except (OSError, UnicodeDecodeError) as exc:
        raise InputFileError(f"cannot read {what} {path}: {exc}") from exc
