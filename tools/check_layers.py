#!/usr/bin/env python3
"""Checks the package's imports against the layers table of DEVELOPERS.md.

The table under the heading "## Layers" lists the layers top to bottom, one row each; its
second column names the top-level parts of ``stationcheck`` (packages, or modules such as
``cli``) that form the layer. A part may import parts of the layers below its own and nothing
else: not a layer above, and not another part of its own row. Every import counts, wherever it
is written (inside a function, under ``TYPE_CHECKING``), and so does
``importlib.import_module("stationcheck....")`` with a literal name. Every top-level part must
appear in the table, so a new package has to be placed.

Standard library only, so ``tools/lint`` can run it before anything is installed. Prints one
line per forbidden import (``path:line: part -> part: why``) and exits 1 when there is any.
"""

from __future__ import annotations

import ast
import re
import sys
from collections.abc import Iterator, Sequence
from dataclasses import dataclass
from pathlib import Path

PACKAGE = "stationcheck"
HEADING = "## Layers"
ROOT = Path(__file__).resolve().parent.parent
# The package's own __init__ (version, logging set-up) sits below every layer.
BOTTOM = "__init__"


@dataclass(frozen=True)
class Import:
    path: Path
    line: int
    source: str  # the importing top-level part
    target: str  # the imported top-level part


def read_layers(developers_md: str) -> list[tuple[str, ...]]:
    """Rows of the layers table, top to bottom; each row the part names in backticks."""
    lines = developers_md.splitlines()
    try:
        start = next(i for i, line in enumerate(lines) if line.strip() == HEADING)
    except StopIteration:
        raise ValueError(f"DEVELOPERS.md has no '{HEADING}' heading") from None
    rows: list[tuple[str, ...]] = []
    in_table = False
    for line in lines[start + 1:]:
        if line.startswith("## "):
            break
        if not line.startswith("|"):
            if in_table:
                break
            continue
        if not in_table:  # the header row
            in_table = True
            continue
        cells = [cell.strip() for cell in line.strip().strip("|").split("|")]
        if len(cells) < 2 or set(cells[1]) <= set("-: "):
            continue
        names = tuple(re.findall(r"`([A-Za-z_][A-Za-z0-9_]*)/?`", cells[1]))
        if names:
            rows.append(names)
    if not rows:
        raise ValueError(f"the '{HEADING}' section of DEVELOPERS.md holds no table rows")
    return rows


def top_parts(package_dir: Path) -> frozenset[str]:
    parts = {p.name for p in package_dir.iterdir() if (p / "__init__.py").is_file()}
    parts |= {p.stem for p in package_dir.glob("*.py") if p.name != "__init__.py"}
    return frozenset(parts)



def _part_of(dotted: str) -> str | None:
    names = dotted.split(".")
    if names[0] != PACKAGE:
        return None
    return names[1] if len(names) > 1 else BOTTOM


def _module_name(path: Path, package_dir: Path) -> list[str]:
    rel = path.relative_to(package_dir.parent).with_suffix("")
    names = list(rel.parts)
    return names[:-1] if names[-1] == "__init__" else names


def imports_of(path: Path, package_dir: Path, parts: frozenset[str]) -> Iterator[Import]:
    names = _module_name(path, package_dir)
    source = names[1] if len(names) > 1 else BOTTOM
    package = names if path.name == "__init__.py" else names[:-1]
    tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
    for node in ast.walk(tree):
        targets: list[str] = []
        if isinstance(node, ast.Import):
            targets = [alias.name for alias in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package[: len(package) - node.level + 1]
                module = ".".join(base + ([node.module] if node.module else []))
            else:
                module = node.module or ""
            targets = [module] if node.module else [f"{module}.{a.name}" for a in node.names]
            if module == PACKAGE:  # from stationcheck import cli
                targets = [f"{module}.{a.name}" for a in node.names]
        elif (isinstance(node, ast.Call) and node.args
              and isinstance(node.args[0], ast.Constant) and isinstance(node.args[0].value, str)
              and isinstance(node.func, ast.Attribute | ast.Name)
              and (node.func.attr if isinstance(node.func, ast.Attribute) else node.func.id)
              == "import_module"):
            targets = [node.args[0].value]
        for target in targets:
            part = _part_of(target)
            if part is not None and part not in parts:  # a name from the package's __init__
                part = BOTTOM
            if part is not None and part != source:
                yield Import(path, getattr(node, "lineno", 0), source, part)


def violations(rows: Sequence[tuple[str, ...]], package_dir: Path) -> list[str]:
    layer_of: dict[str, int] = {}
    problems: list[str] = []
    for index, row in enumerate(rows):
        for name in row:
            if name in layer_of:
                problems.append(f"DEVELOPERS.md: '{name}' is in two rows of the layers table")
            layer_of[name] = index
    layer_of[BOTTOM] = len(rows)
    parts = top_parts(package_dir)
    for missing in sorted(parts - set(layer_of) - {"__main__"}):
        problems.append(f"DEVELOPERS.md: '{missing}' has no row in the layers table")
    layer_of.setdefault("__main__", -1)
    for unknown in sorted(set(layer_of) - parts - {BOTTOM, "__main__"}):
        problems.append(f"DEVELOPERS.md: the layers table names '{unknown}', which does not exist")
    for path in sorted(package_dir.rglob("*.py")):
        for imp in imports_of(path, package_dir, parts):
            source, target = layer_of.get(imp.source), layer_of.get(imp.target)
            if source is None or target is None or target > source:
                continue
            why = "same layer" if target == source else "layer above"
            rel = imp.path.relative_to(package_dir.parent)
            problems.append(f"{rel}:{imp.line}: {imp.source} -> {imp.target}: {why}")
    return problems


def main(argv: Sequence[str] = ()) -> int:
    root = Path(argv[0]) if argv else ROOT
    try:
        rows = read_layers((root / "DEVELOPERS.md").read_text(encoding="utf-8"))
    except (OSError, ValueError) as exc:
        print(f"check_layers: {exc}", file=sys.stderr)
        return 1
    problems = violations(rows, root / PACKAGE)
    for problem in problems:
        print(problem)
    if problems:
        print(f"check_layers: {len(problems)} imports break the layers table of DEVELOPERS.md")
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
