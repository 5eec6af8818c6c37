"""The state graph drawn from the transition table: DOT and text agree with the table, and the
sequencer only ever changes phase along a declared edge.

No DOT parser is a dependency of the project (Graphviz and pydot are not installed), so the DOT
text is read back here with a strict reader of the statements it uses (the grammar of the DOT
language, graphviz.org/doc/info/lang.html): a ``digraph`` with node and edge statements.
"""

from __future__ import annotations

import re
from collections.abc import Callable
from dataclasses import replace

from stationcheck.core.state import Phase
from stationcheck.core.state_graph import (
    ANY_INPUT,
    Edge,
    as_dot,
    as_text,
    edges,
    reachable,
    targets,
)
from stationcheck.core.step_kinds import STEP_KINDS
from stationcheck.core.transitions import OPEN, PHASES, TABLE
from tests.core.conftest import Run, Scenario

ID = r'"(?:[^"\\]|\\.)*"|[A-Za-z_][A-Za-z0-9_]*'
NODE = re.compile(rf"^(?P<id>{ID})(?:\s*\[(?P<attrs>[^\]]*)\])?;$")
ARROW = re.compile(rf"^(?P<a>{ID})\s*->\s*(?P<b>{ID})\s*\[label=(?P<label>{ID})\];$")


def _unquote(text: str) -> str:
    return text[1:-1].replace('\\"', '"') if text.startswith('"') else text


def read_dot(text: str) -> tuple[set[str], list[tuple[str, str, list[str]]]]:
    """Nodes and labelled arrows of a DOT digraph; anything else is refused."""
    lines = [line.strip() for line in text.strip().splitlines()]
    assert re.fullmatch(r"digraph [A-Za-z_][A-Za-z0-9_]* \{", lines[0]), lines[0]
    assert lines[-1] == "}"
    nodes: set[str] = set()
    arrows: list[tuple[str, str, list[str]]] = []
    for line in lines[1:-1]:
        if line in ("rankdir=LR;",) or line.startswith("node ["):
            continue
        arrow = ARROW.match(line)
        if arrow is not None:
            label = _unquote(arrow["label"]).split("\\n")
            arrows.append((_unquote(arrow["a"]), _unquote(arrow["b"]), label))
            continue
        node = NODE.match(line)
        assert node is not None, f"not a DOT statement this graph uses: {line!r}"
        nodes.add(_unquote(node["id"]))
    return nodes, arrows


def test_dot_names_every_state_and_only_known_states() -> None:
    nodes, arrows = read_dot(as_dot())
    assert nodes == set(PHASES)
    assert {a for a, _, _ in arrows} | {b for _, b, _ in arrows} <= set(PHASES)
    inputs = {row.kind for row in TABLE} | {ANY_INPUT}
    assert all(set(label) <= inputs for _, _, label in arrows)


def test_dot_arrows_are_the_tables_state_changes() -> None:
    _, arrows = read_dot(as_dot())
    drawn = {(a, kind, b) for a, b, label in arrows for kind in label}
    declared = set()
    for row in TABLE:
        for phase in row.phases:
            for target in row.leads_to:
                to = {"same": (), "idle": ("idle",), "step": OPEN}[target]
                declared.update((phase, row.kind, t) for t in to)
    timed = {(p, ANY_INPUT, t) for p in PHASES if p in STEP_KINDS and STEP_KINDS[p].timed
             for t in OPEN + ("idle",)}
    assert drawn == declared | timed
    assert ("pick", ANY_INPUT, "idle") in drawn  # the pick timer can end the last step


def test_every_state_is_reachable_from_idle_and_can_return_to_it() -> None:
    assert reachable("idle") == set(PHASES)
    assert all("idle" in reachable(phase) for phase in PHASES)


def test_a_state_nothing_leads_to_is_unreachable() -> None:
    graph = tuple(e for e in edges() if e.target != "confirm" or e.source == "confirm")
    assert "confirm" not in reachable("idle", graph)


def test_text_graph_matches_the_table() -> None:
    text = as_text()
    blocks: dict[str, list[str]] = {}
    current = ""
    for line in text.splitlines()[1:]:
        if not line.startswith("  "):
            current = line
            blocks[current] = []
        else:
            blocks[current].append(line.strip())
    assert list(blocks) == list(PHASES)
    for row in TABLE:
        for phase in row.phases:
            lines = blocks[phase]
            if row.leads_to == ("same",):
                stays = next(line for line in lines if line.startswith("stays on"))
                assert row.kind in stays.split(": ", 1)[1].split(", ")
                continue
            said = next(line for line in lines if line.startswith(f"{row.kind} -> "))
            shown = said.split(" -> ", 1)[1].split(", ")
            to = {"same": (phase,), "idle": ("idle",), "step": OPEN}
            expected = {t for target in row.leads_to for t in to[target]}
            assert shown == [p for p in PHASES if p in expected]
    for phase in PHASES:
        timed = phase in STEP_KINDS and STEP_KINDS[phase].timed
        assert (f"{ANY_INPUT} -> {', '.join(PHASES)}" in blocks[phase]) == timed


# ---- the sequencer keeps to the graph


def phase_changes(run: Run) -> list[tuple[Phase, str, Phase]]:
    before: Phase = "idle"
    seen = []
    for observation, state in zip(run.observations, run.states, strict=True):
        seen.append((before, observation.kind, state.phase))
        before = state.phase
    return seen


def undeclared(seen: list[tuple[Phase, str, Phase]],
               graph: tuple[Edge, ...] | None = None) -> set[tuple[Phase, str, Phase]]:
    graph = edges() if graph is None else graph
    return {(a, kind, b) for a, kind, b in seen if b not in targets(a, kind, graph)}


def _scenes(scenario: Callable[..., Scenario]) -> list[tuple[Phase, str, Phase]]:
    seen: list[tuple[Phase, str, Phase]] = []
    sc = scenario()
    sc.full_unit("U-1")
    sc.unit("U-2").tip(None, 50).pick()
    sc.arrive("s1").run_tightening(ok=False).redwell().run_tightening(ok=False)
    sc.arrive("s2").run_tightening(ok=True).arrive("s3").run_tightening(ok=True)
    sc.tip(None, 50).verdict("chk", "present").ack()
    sc.unit("U-2", rework=True, positions=("s1",)).arrive("s1").run_tightening(ok=True)
    sc.tip(None, 50).verdict("chk", "present")
    sc.unit("U-3").tip(None, 50).pick().fasten_all().tip(None, 50).ack()  # check fails
    sc.unit("U-4").tip(None, 50).abort()
    sc.unit("U-5").tip(None, 50).pick().arrive("s1").unit("U-6").reset().wait(100)
    seen += phase_changes(sc.run())
    only_pick = scenario(steps=(STEP_KINDS["pick"].record("take", "bin_a"),))  # type: ignore[call-arg]
    only_pick.unit("P-1").tip(None, 50).pick()
    seen += phase_changes(only_pick.run())
    return seen


def test_the_sequencer_changes_phase_only_along_declared_edges(
        scenario: Callable[..., Scenario]) -> None:
    seen = _scenes(scenario)
    changes = {(a, kind, b) for a, kind, b in seen if a != b}
    # the scenes walk every kind of change the table declares, not only the easy ones
    assert {("idle", "unit_started", "pick"), ("pick", "zone", "fasten"),
            ("fasten", "tightening_result", "check"), ("check", "check_verdict", "confirm"),
            ("confirm", "operator_ack", "idle"), ("check", "operator_ack", "idle"),
            ("pick", "abort", "idle"), ("fasten", "unit_started", "pick"),
            ("idle", "unit_started", "fasten"), ("check", "check_verdict", "idle")} <= changes
    assert undeclared(seen) == set()


def test_a_table_that_misdeclares_a_row_is_caught(scenario: Callable[..., Scenario]) -> None:
    wrong = tuple(replace(row, leads_to=("same",)) if row.kind == "check_verdict" and
                  "check" in row.phases else row for row in TABLE)
    found = undeclared(_scenes(scenario), edges(wrong))
    assert ("check", "check_verdict", "confirm") in found
