"""The core stays pure: no OpenCV, onnxruntime, pymodbus, sqlite3, clocks, threads or I/O."""

from __future__ import annotations

import ast
import subprocess
import sys
from pathlib import Path

import pytest

import stationcheck.core

CORE_DIR = Path(stationcheck.core.__file__).parent
MODULES = sorted(CORE_DIR.glob("*.py"))

FORBIDDEN = {
    "cv2", "onnxruntime", "pymodbus", "sqlite3", "time", "datetime", "threading", "asyncio",
    "multiprocessing", "concurrent", "socket", "subprocess", "os", "io", "pathlib", "shutil",
    "tempfile", "random", "secrets", "urllib", "http", "requests", "yaml",
}  # fmt: skip
ALLOWED = {
    "__future__", "collections", "dataclasses", "enum", "functools", "itertools", "json",
    "logging", "math", "types", "typing", "numpy", "shapely", "stationcheck",
}  # fmt: skip
FORBIDDEN_CALLS = {"open", "print", "input", "exec", "eval", "__import__"}


def imported_modules(tree: ast.AST) -> list[str]:
    names: list[str] = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names.extend(alias.name for alias in node.names)
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                names.append("stationcheck.core")  # relative import stays inside the package
            elif node.module:
                names.append(node.module)
    return names


def test_the_scan_sees_every_core_module() -> None:
    names = {path.stem for path in MODULES}
    assert {"sequencer", "transitions", "zones", "tracker", "filters", "records"} <= names


@pytest.mark.parametrize("path", MODULES, ids=lambda p: p.name)
def test_core_module_imports_only_pure_libraries(path: Path) -> None:
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    for name in imported_modules(tree):
        top = name.split(".")[0]
        assert top not in FORBIDDEN, f"{path.name} imports {name}"
        assert top in ALLOWED, f"{path.name} imports {name}, which is not on the pure list"
        if top == "stationcheck":
            assert name.startswith("stationcheck.core") or name == "stationcheck.errors", (
                f"{path.name} imports {name}; the core may only use itself and stationcheck.errors"
            )


@pytest.mark.parametrize("path", MODULES, ids=lambda p: p.name)
def test_core_module_calls_no_io_builtins(path: Path) -> None:
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    calls = {
        node.func.id
        for node in ast.walk(tree)
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Name)
    }
    assert not calls & FORBIDDEN_CALLS, f"{path.name} calls {sorted(calls & FORBIDDEN_CALLS)}"


def test_importing_the_core_loads_no_heavy_edge_library() -> None:
    modules = " ".join(
        f"stationcheck.core.{path.stem}" for path in MODULES if path.stem != "__init__"
    )
    code = (
        "import importlib, sys\n"
        f"for name in {modules!r}.split(): importlib.import_module(name)\n"
        "heavy = ('cv2', 'onnxruntime', 'pymodbus', 'sqlite3')\n"
        "print(' '.join(m for m in heavy if m in sys.modules))"
    )
    result = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True
    )
    assert result.stdout.strip() == ""


def test_the_scan_catches_a_forbidden_import() -> None:
    tree = ast.parse("import time\nfrom cv2 import imread\nfrom . import zones\n")
    assert imported_modules(tree) == ["time", "cv2", "stationcheck.core"]
