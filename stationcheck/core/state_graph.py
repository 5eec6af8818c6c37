"""The sequencer's state graph, drawn from the transition table (``stationcheck states``).

The states are the phases (``idle`` and one per step kind). Each row of
:data:`~stationcheck.core.transitions.TABLE` gives edges from its phases: ``same`` stays,
``idle`` closes the unit, ``step`` goes to the next (or first) step, of any kind. A timed step
kind (a pick completes on its timer in ``conditions.settle``) can also end after any input;
those edges carry the input ``*``.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

from stationcheck.core.state import Phase
from stationcheck.core.step_kinds import STEP_KINDS
from stationcheck.core.transitions import OPEN, PHASES, TABLE, Row

ANY_INPUT = "*"


@dataclass(frozen=True)
class Edge:
    source: Phase
    kind: str  # the input kind, or ANY_INPUT for a timed step's end
    target: Phase
    stays: bool  # the row says "same": the input never changes the state


def _row_edges(row: Row) -> Iterable[Edge]:
    for phase in row.phases:
        for target in row.leads_to:
            if target == "same":
                yield Edge(phase, row.kind, phase, stays=True)
            elif target == "idle":
                yield Edge(phase, row.kind, "idle", stays=False)
            else:
                yield from (Edge(phase, row.kind, step, stays=False) for step in OPEN)


def edges(rows: tuple[Row, ...] = TABLE) -> tuple[Edge, ...]:
    found = [edge for row in rows for edge in _row_edges(row)]
    for phase in PHASES:
        kind = STEP_KINDS.get(phase)
        if kind is not None and kind.timed:
            found.extend(Edge(phase, ANY_INPUT, target, stays=False) for target in OPEN + ("idle",))
    return tuple(dict.fromkeys(found))


def targets(phase: Phase, input_kind: str, graph: tuple[Edge, ...] | None = None) -> set[Phase]:
    """The phases the sequencer may be in after ``input_kind`` arrives in ``phase``."""
    graph = edges() if graph is None else graph
    return {e.target for e in graph if e.source == phase and e.kind in (input_kind, ANY_INPUT)}


def reachable(start: Phase = "idle", graph: tuple[Edge, ...] | None = None) -> set[Phase]:
    graph = edges() if graph is None else graph
    seen, todo = {start}, [start]
    while todo:
        phase = todo.pop()
        for edge in graph:
            if edge.source == phase and edge.target not in seen:
                seen.add(edge.target)
                todo.append(edge.target)
    return seen


def _changes(graph: tuple[Edge, ...], phase: Phase) -> dict[str, list[Phase]]:
    """Input kind -> the states it can lead to, for inputs that may change the state."""
    found: dict[str, list[Phase]] = {}
    moving = {e.kind for e in graph if e.source == phase and not e.stays}
    for edge in graph:
        if edge.source == phase and edge.kind in moving:
            found.setdefault(edge.kind, [])
            if edge.target not in found[edge.kind]:
                found[edge.kind].append(edge.target)
    return {kind: sorted(ts, key=PHASES.index) for kind, ts in found.items()}


def as_text(graph: tuple[Edge, ...] | None = None) -> str:
    """Per state: the inputs that can change it and where they lead, then those that never do."""
    graph = edges() if graph is None else graph
    lines = [f"states: {', '.join(PHASES)} (start: idle; * = any input)"]
    for phase in PHASES:
        lines.append(phase)
        changes = _changes(graph, phase)
        for kind, to in changes.items():
            lines.append(f"  {kind} -> {', '.join(to)}")
        stays = sorted({e.kind for e in graph if e.source == phase} - set(changes))
        if stays:
            timed = ANY_INPUT in changes
            said = "stays on (unless its timer ends it)" if timed else "stays on"
            lines.append(f"  {said}: {', '.join(stays)}")
    return "\n".join(lines) + "\n"


def _quoted(text: str) -> str:
    return '"' + text.replace("\\", "\\\\").replace('"', '\\"') + '"'


def as_dot(graph: tuple[Edge, ...] | None = None) -> str:
    """Graphviz DOT: one arrow per pair of states, labelled with the inputs that take it; the
    inputs that never change a state are left out (``as_text`` lists them)."""
    graph = edges() if graph is None else graph
    lines = [
        "digraph stationcheck_states {",
        "  rankdir=LR;",
        "  node [shape=box];",
        f"  {_quoted('idle')} [shape=doublecircle];",
    ]
    lines.extend(f"  {_quoted(phase)};" for phase in PHASES if phase != "idle")
    arrows: dict[tuple[Phase, Phase], list[str]] = {}
    for edge in graph:
        if not edge.stays:
            kinds = arrows.setdefault((edge.source, edge.target), [])
            if edge.kind not in kinds:
                kinds.append(edge.kind)
    for (source, target), kinds in arrows.items():
        label = "\\n".join(_quoted(kind)[1:-1] for kind in kinds)  # \n: a line break in DOT
        lines.append(f'  {_quoted(source)} -> {_quoted(target)} [label="{label}"];')
    lines.append("}")
    return "\n".join(lines) + "\n"
