"""Every YAML file stationcheck reads or writes goes through here: one library (ruamel.yaml),
one dialect (YAML 1.2, so ``on``, ``no`` and ``yes`` are text, as the setup screen writes them),
and limits a hostile file cannot get past.

Limits, checked while the file is composed, before anything is built from it: nesting depth,
node count (counting what every alias stands for, so an alias bomb is refused after reading a
few hundred bytes), alias count, aliases that refer to themselves, and tags: only plain values
(text, numbers, true/false, null, mappings, lists) are taken; ``!!set``, ``!!binary``, Python
tags and custom tags are refused.
"""

from __future__ import annotations

import io
import math
import warnings
from collections.abc import Iterable, Mapping
from types import SimpleNamespace
from typing import Any

from ruamel.yaml import YAML
from ruamel.yaml.comments import CommentedMap, CommentedSeq
from ruamel.yaml.composer import Composer
from ruamel.yaml.error import MarkedYAMLError, ReusedAnchorWarning, YAMLError
from ruamel.yaml.events import AliasEvent
from ruamel.yaml.nodes import MappingNode, Node, SequenceNode
from ruamel.yaml.resolver import VersionedResolver

try:
    from ruamel.yaml.main import CParser  # type: ignore[attr-defined]
except ImportError:  # pragma: no cover - the C parser is an optional speed-up
    CParser = None

from stationcheck.errors import ConfigError

MAX_DEPTH = 40
MAX_NODES = 500_000
MAX_ALIASES = 200
MAX_FILE_BYTES = 32 * 1024 * 1024
_CORE = "tag:yaml.org,2002:"
PLAIN_TAGS = frozenset(_CORE + t for t in ("str", "int", "float", "bool", "null", "map", "seq"))


class LimitError(MarkedYAMLError):
    """A file past one of the limits (its message names which)."""


class _LimitedComposer(Composer):
    aliases = 0
    nodes = 0

    def compose_node(self, parent: Any, index: Any) -> Any:
        event = self.parser.peek_event()
        if isinstance(event, AliasEvent):
            self.aliases += 1
            if self.aliases > MAX_ALIASES:
                raise LimitError(
                    None, None, f"more than {MAX_ALIASES} aliases (*name)", event.start_mark
                )
        else:
            tag = getattr(event, "tag", None)
            if tag is not None and tag not in PLAIN_TAGS:
                shown = tag.replace(_CORE, "!!")
                raise LimitError(
                    None,
                    None,
                    f"the tag {shown} is not taken here; write plain values, mappings and lists",
                    event.start_mark,
                )
            self.nodes += 1
            if self.nodes > MAX_NODES:
                raise LimitError(None, None, f"more than {MAX_NODES} values", event.start_mark)
        return super().compose_node(parent, index)


def _reader(typ: str) -> YAML:
    yaml = YAML(typ=typ, pure=True)
    yaml.Composer = _LimitedComposer
    yaml.max_depth = MAX_DEPTH
    yaml.allow_duplicate_keys = True  # callers report duplicates with their lines
    return yaml


def round_trip() -> YAML:
    """The round-trip reader/writer (keeps comments, order and quoting) with the limits."""
    return _reader("rt")


def _events(text: str) -> Any:
    """A loader whose parser is libyaml's (``ruamel.yaml.clib``, about three times faster on
    a large station) when installed, else the pure-Python one. Either way our own composer
    builds the nodes, so the depth limit holds before any deep recursion."""
    if CParser is None:
        return None
    loader = SimpleNamespace(_parser=CParser(text), max_depth=MAX_DEPTH)
    loader._resolver = VersionedResolver(version=None, loader=loader)
    return loader


def compose(text: str, name: str) -> Node | None:
    """The node tree of one YAML document (None when empty), within the limits.

    Raises:
        ConfigError: not YAML, past a limit, or more than one document; names file and line.
    """
    if len(text) > MAX_FILE_BYTES:
        raise ConfigError(
            f"{name}: larger than {MAX_FILE_BYTES // (1024 * 1024)} MB; a "
            "station file is far smaller"
        )
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", ReusedAnchorWarning)
            try:
                fast = _events(text)
                node: Node | None = (
                    _LimitedComposer(loader=fast).get_single_node()
                    if fast is not None
                    else _reader("safe").compose(text)
                )
            except MarkedYAMLError:  # the pure parser words syntax errors more exactly
                node = _reader("safe").compose(text)
    except MarkedYAMLError as exc:
        raise ConfigError(syntax_message(name, exc, text)) from exc
    except YAMLError as exc:
        raise ConfigError(f"{name}: not valid YAML ({exc})") from exc
    if node is not None:
        _check_expanded(node, name)
    return node


def construct(node: Node, name: str) -> Any:
    """Plain Python values (dict, list, str, int, float, bool, None) of a composed tree."""
    try:
        return _reader("safe").constructor.construct_document(node)
    except YAMLError as exc:
        raise ConfigError(f"{name}: not valid YAML ({exc})") from exc


def load_plain(text: str, name: str) -> Any:
    """``text`` as plain Python values, within the limits (None when empty)."""
    node = compose(text, name)
    return None if node is None else construct(node, name)


def _check_expanded(root: Node, name: str) -> None:
    """Refuse aliases that contain themselves and trees that aliases blow up past
    :data:`MAX_NODES`; one pass, each node sized once."""
    sizes: dict[int, int] = {}
    open_nodes: set[int] = set()
    stack: list[tuple[Node, bool]] = [(root, False)]
    while stack:
        node, done = stack.pop()
        key = id(node)
        children = _children(node)
        if done:
            open_nodes.discard(key)
            sizes[key] = 1 + sum(sizes[id(child)] for child in children)
            if sizes[key] > MAX_NODES:
                raise ConfigError(
                    f"{name}:{node.start_mark.line + 1}: not taken: its aliases "
                    f"stand for more than {MAX_NODES} values (an alias bomb?)"
                )
            continue
        if key in sizes:
            continue
        if key in open_nodes:
            raise ConfigError(
                f"{name}:{node.start_mark.line + 1}: not taken: an alias refers "
                "to the mapping or list it is in"
            )
        open_nodes.add(key)
        stack.append((node, True))
        for child in children:
            if id(child) in open_nodes:
                raise ConfigError(
                    f"{name}:{child.start_mark.line + 1}: not taken: an alias "
                    "refers to the mapping or list it is in"
                )
            if id(child) not in sizes:
                stack.append((child, False))


def _children(node: Node) -> list[Node]:
    if isinstance(node, MappingNode):
        return [part for pair in node.value for part in pair]
    if isinstance(node, SequenceNode):
        return list(node.value)
    return []


def syntax_message(name: str, exc: MarkedYAMLError, text: str = "") -> str:
    mark = exc.problem_mark or exc.context_mark
    where = f"{name}:{mark.line + 1}:{mark.column + 1}" if mark else name
    problem = exc.problem or exc.context or "unreadable"
    context = exc.context or ""
    if isinstance(exc, LimitError):
        return f"{where}: not taken: {problem}"
    if problem.startswith("maximum depth"):
        return f"{where}: not taken: nested deeper than {MAX_DEPTH} levels"
    if problem.startswith("but ") and context:
        problem = f"{context} {problem}"
    elif context and exc.context_mark is not None and exc.problem_mark is not None:
        problem += f" ({context} that starts on line {exc.context_mark.line + 1})"
    if "\\t" in problem or _tab_at(text, mark):
        problem += "; indent with spaces, YAML does not allow tabs"
    if "single document" in problem:
        problem += "; a station config is one document, so remove the '---' line"
    return f"{where}: not valid YAML: {problem}"


def _tab_at(text: str, mark: Any) -> bool:
    if mark is None or not text:
        return False
    lines = text.split("\n")
    line = lines[mark.line] if 0 <= mark.line < len(lines) else ""
    return line[mark.column : mark.column + 1] == "\t"


def flow_list(items: Iterable[Any]) -> CommentedSeq:
    """A list written on one line: ``[a, b, c]``."""
    seq = CommentedSeq(items)
    seq.fa.set_flow_style()
    return seq


def flow_map(items: Mapping[str, Any]) -> CommentedMap:
    """A mapping written on one line: ``{low: 1, high: 2}``."""
    mapping = CommentedMap(items)
    mapping.fa.set_flow_style()
    return mapping


def dump_text(data: Any, width: int = 4096) -> str:
    """``data`` as YAML 1.2 block text (lists at their key's indent); whole floats as ints."""
    yaml = YAML(typ="rt", pure=True)
    yaml.width = width
    yaml.indent(mapping=2, sequence=2, offset=0)
    out = io.StringIO()
    yaml.dump(_whole_numbers(data), out)
    return out.getvalue()


def scalar_text(value: str) -> str:
    """How YAML 1.2 writes one text value (quoted only when it must be)."""
    return dump_text(value, width=1000).strip().removesuffix("...").strip()


def _whole_numbers(value: Any) -> Any:
    if isinstance(value, float) and math.isfinite(value) and value.is_integer():
        return int(value)
    if isinstance(value, CommentedSeq):
        for index, item in enumerate(value):
            value[index] = _whole_numbers(item)
        return value
    if isinstance(value, CommentedMap):
        for key in value:
            value[key] = _whole_numbers(value[key])
        return value
    if isinstance(value, list | tuple):
        return [_whole_numbers(item) for item in value]
    if isinstance(value, dict):
        return {key: _whole_numbers(item) for key, item in value.items()}
    return value
