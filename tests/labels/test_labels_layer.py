"""The labelling package sits below the screens: it imports nothing from stationcheck.web
(read from the source with Python's own ast, so a lazy import inside a function counts too)."""

from __future__ import annotations

import ast
from pathlib import Path

import stationcheck.labels

PACKAGE = Path(stationcheck.labels.__file__).parent


def _imports(path: Path) -> set[str]:
    names: set[str] = set()
    for node in ast.walk(ast.parse(path.read_text(), str(path))):
        if isinstance(node, ast.Import):
            names.update(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom) and node.module:
            names.add(node.module)
    return names


def test_labels_import_no_screen_code() -> None:
    files = sorted(PACKAGE.glob("*.py"))
    assert len(files) >= 6
    for path in files:
        upward = {
            n
            for n in _imports(path)
            if n.startswith(("stationcheck.web", "stationcheck.commands", "stationcheck.cli"))
        }
        assert upward == set(), f"{path.name} imports {upward}"
