"""``stationcheck states``: the sequencer's state graph, drawn from its transition table.

Prints each state with the inputs that can change it and where they lead; ``--dot FILE`` also
writes the graph as Graphviz DOT (plain text; draw it with Graphviz if you have it, e.g.
``dot -Tsvg FILE -o states.svg``). Exit code 0; 3 when the DOT file cannot be written.
"""

from __future__ import annotations

import argparse
from pathlib import Path


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "states",
        help="print the sequencer's state graph (--dot FILE: also as a Graphviz file)",
        description=(
            "Prints the sequencer's states (idle and one per step kind), and for each the inputs "
            "that can change it and the states they lead to, as declared in the transition "
            "table. With --dot FILE it also writes the graph in Graphviz's DOT language; "
            "Graphviz itself is not needed to write it."
        ),
    )
    p.add_argument("--dot", type=Path, metavar="FILE", help="also write the graph as DOT here")
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    from stationcheck.core.state_graph import as_dot, as_text, edges
    from stationcheck.errors import InputFileError

    graph = edges()
    print(as_text(graph), end="")
    if args.dot is not None:
        try:
            args.dot.write_text(as_dot(graph), encoding="utf-8")
        except OSError as exc:
            raise InputFileError(f"{args.dot}: cannot write the DOT file ({exc.strerror})") from exc
        print(f"DOT file: {args.dot}")
    return 0
