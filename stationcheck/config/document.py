"""A YAML file read together with the line of every key and list item in it.

Problems that stop reading altogether (missing file, not YAML, empty, not a mapping) raise
:class:`~stationcheck.errors.ConfigError` with one line naming the file. Duplicate keys, which
YAML loaders silently resolve by keeping the last one, are kept as located findings.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import Any

from ruamel.yaml.nodes import MappingNode, Node, ScalarNode, SequenceNode

from stationcheck.config import yaml_text
from stationcheck.config.error_wording import Location, describe_value
from stationcheck.config.findings import Finding
from stationcheck.errors import ConfigError


@dataclass(frozen=True)
class YamlDocument:
    data: dict[str, Any]
    lines: dict[Location, int] = field(default_factory=dict)
    problems: tuple[Finding, ...] = ()

    def position_of(self, path: Location) -> int:
        """Where ``path`` (or its nearest ancestor) comes in the data, in file order."""
        positions = self._positions
        for end in range(len(path), -1, -1):
            position = positions.get(tuple(path[:end]))
            if position is not None:
                return position
        return 0

    @cached_property
    def _positions(self) -> dict[Location, int]:
        positions: dict[Location, int] = {}
        _number_paths(self.data, (), positions)
        return positions

    def line_of(self, path: Location) -> int | None:
        """The line of ``path``, or of its nearest ancestor that is in the file."""
        for end in range(len(path), -1, -1):
            line = self.lines.get(tuple(path[:end]))
            if line is not None:
                return line
        return None


def _number_paths(value: Any, path: Location, out: dict[Location, int]) -> None:
    out[path] = len(out)
    if isinstance(value, dict):
        for key, item in value.items():
            _number_paths(item, path + (str(key),), out)
    elif isinstance(value, list):
        for index, item in enumerate(value):
            _number_paths(item, path + (index,), out)


def read_yaml_file(path: Path, shown_as: str | None = None) -> YamlDocument:
    """Read and parse ``path``; ``shown_as`` is how messages name the file."""
    name = shown_as or str(path)
    if not path.exists():
        raise ConfigError(f"{name}: no such file")
    if path.is_dir():
        raise ConfigError(f"{name}: is a folder; give the station config file (a .yaml file)")
    try:
        raw = path.read_bytes()
    except OSError as exc:
        raise ConfigError(f"{name}: cannot be read ({exc.strerror or exc})") from exc
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise ConfigError(
            f"{name}: is not a text file (byte {exc.start} is not UTF-8); "
            "a station config is a YAML text file"
        ) from exc
    return parse_yaml_text(text, name)


def parse_yaml_text(text: str, name: str) -> YamlDocument:
    node = yaml_text.compose(text, name)
    if node is None:
        what = "is empty" if not text.strip() else "holds only comments"
        raise ConfigError(
            f"{name}: the file {what}; a station config starts with 'format_version: 1'"
        )
    lines: dict[Location, int] = {(): node.start_mark.line + 1}
    problems: list[Finding] = []
    _index(node, (), lines, problems)  # before constructing: that merges '<<' keys in place
    data = yaml_text.construct(node, name)
    if not isinstance(data, dict):
        raise ConfigError(
            f"{name}:{node.start_mark.line + 1}: the top level must be a mapping of keys "
            f"(format_version, station, camera, ...), but the file holds {describe_value(data)}"
        )
    return YamlDocument(data=data, lines=lines, problems=tuple(problems))


def _index(node: Node, path: Location, lines: dict[Location, int], problems: list[Finding]) -> None:
    if isinstance(node, MappingNode):
        first_seen: dict[str, int] = {}
        for key_node, value_node in node.value:
            key = key_node.value if isinstance(key_node, ScalarNode) else None
            if not isinstance(key, str):
                continue
            line = key_node.start_mark.line + 1
            if key in first_seen:
                problems.append(
                    Finding(
                        "error",
                        path + (key,),
                        f"'{key}' is given twice in the same mapping (first on line "
                        f"{first_seen[key]}); only the first one counts, so remove one",
                        line,
                    )
                )
            first_seen.setdefault(key, line)
            lines[path + (key,)] = line
            _index(value_node, path + (key,), lines, problems)
    elif isinstance(node, SequenceNode):
        for index, item in enumerate(node.value):
            lines[path + (index,)] = item.start_mark.line + 1
            _index(item, path + (index,), lines, problems)
