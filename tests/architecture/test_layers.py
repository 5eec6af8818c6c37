"""The package keeps the layers that DEVELOPERS.md's table names (``tools/check_layers.py``)."""

from __future__ import annotations

import importlib.util
import shutil
import subprocess
import sys
from pathlib import Path
from types import ModuleType

import pytest

ROOT = Path(__file__).resolve().parents[2]
CHECKER = ROOT / "tools" / "check_layers.py"


def _checker() -> ModuleType:
    spec = importlib.util.spec_from_file_location("check_layers", CHECKER)
    assert spec is not None and spec.loader is not None
    module = importlib.util.module_from_spec(spec)
    sys.modules.setdefault("check_layers", module)  # dataclasses look their module up there
    spec.loader.exec_module(module)
    return module


def test_the_package_keeps_the_layers_of_developers_md() -> None:
    checker = _checker()
    rows = checker.read_layers((ROOT / "DEVELOPERS.md").read_text(encoding="utf-8"))
    assert rows[0] == ("commands",) and rows[-1][0] == "errors"
    assert checker.violations(rows, ROOT / "stationcheck") == []


@pytest.fixture(scope="module")
def package_copy(tmp_path_factory: pytest.TempPathFactory) -> Path:
    tmp_path = tmp_path_factory.mktemp("layers")
    shutil.copytree(ROOT / "stationcheck", tmp_path / "stationcheck",
                    ignore=shutil.ignore_patterns("__pycache__", "*.onnx"))
    shutil.copy(ROOT / "DEVELOPERS.md", tmp_path / "DEVELOPERS.md")
    return tmp_path


@pytest.mark.parametrize(
    ("module", "line", "expected"),
    [
        ("core/zones.py", "from stationcheck.store import sqlite_log", "core -> store: layer above"),
        ("store/queries.py", "from stationcheck.commands import bench",
         "store -> commands: layer above"),
        ("config/schema.py", "def f():\n    import stationcheck.judgements.station",
         "config -> judgements: layer above"),
        ("vision/detector.py", "importlib.import_module('stationcheck.demo_station.files')",
         "vision -> demo_station: layer above"),
        ("pipeline/comparison.py", "from stationcheck.quality import proportion",
         "pipeline -> quality: same layer"),
    ],
)
def test_a_wrong_import_is_named_with_its_file_and_line(
    package_copy: Path, module: str, line: str, expected: str
) -> None:
    path = package_copy / "stationcheck" / module
    text = path.read_text(encoding="utf-8")
    lines_before = len(text.splitlines())
    path.write_text(text + line + "\n", encoding="utf-8")
    try:
        done = subprocess.run([sys.executable, str(CHECKER), str(package_copy)],
                              capture_output=True, text=True, timeout=60, check=False)
    finally:
        path.write_text(text, encoding="utf-8")
    assert done.returncode == 1
    assert f"stationcheck/{module}:{lines_before + line.count(chr(10)) + 1}: {expected}" \
        in done.stdout.splitlines()


def test_a_package_missing_from_the_table_is_named(package_copy: Path) -> None:
    new_part = package_copy / "stationcheck" / "newpart"
    new_part.mkdir()
    (new_part / "__init__.py").write_text("", encoding="utf-8")
    checker = _checker()
    rows = checker.read_layers((package_copy / "DEVELOPERS.md").read_text(encoding="utf-8"))
    try:
        assert "DEVELOPERS.md: 'newpart' has no row in the layers table" in checker.violations(
            rows, package_copy / "stationcheck")
    finally:
        shutil.rmtree(new_part)
