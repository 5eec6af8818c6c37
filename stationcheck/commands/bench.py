"""``stationcheck bench``: per-stage timings and memory, one section per part of the pipeline.

The sections live in :mod:`stationcheck.benches` (see :mod:`stationcheck.benches.measuring`);
this command parses the options, runs the chosen sections and prints their rows.
"""

from __future__ import annotations

import argparse
import json
import sys
from dataclasses import asdict
from pathlib import Path

from stationcheck.benches.measuring import BenchOptions, BenchRow, load_sections
from stationcheck.errors import InputFileError


def register(subparsers: argparse._SubParsersAction) -> None:  # type: ignore[type-arg]
    p = subparsers.add_parser(
        "bench",
        help="measure per-stage timings and memory on this machine",
        description=(
            "Measures each pipeline section (per-frame median and p99 milliseconds, resident "
            "memory) on 640x480 frames. Figures vary with machine load; targets are printed "
            "beside them."
        ),
    )
    p.add_argument(
        "--section",
        action="append",
        default=None,
        help="run only this section (repeatable; default: all)",
    )
    p.add_argument(
        "--frames",
        type=int,
        default=None,
        help="frames per measurement (default: each section's own, 300 to 900)",
    )
    p.add_argument(
        "--threads",
        default="1,2",
        help="comma-separated thread counts for the model (default: %(default)s)",
    )
    p.add_argument("--model", type=Path, default=None, help="coarse .onnx model (default: bundled)")
    p.add_argument(
        "--video",
        type=Path,
        default=None,
        help="video to take frames from (default: the sample video)",
    )
    p.add_argument("--json", action="store_true", help="print one JSON object")
    p.set_defaults(handler=run)


def run(args: argparse.Namespace) -> int:
    sections = load_sections()
    chosen = args.section or list(sections)
    unknown = [name for name in chosen if name not in sections]
    if unknown:
        raise InputFileError(f"unknown bench section {unknown}; known: {sorted(sections)}")
    try:
        threads = tuple(int(t) for t in args.threads.split(","))
    except ValueError as exc:
        raise InputFileError(f"--threads must be comma-separated integers: {args.threads}") from exc
    if (args.frames is not None and args.frames < 10) or any(t < 1 for t in threads):
        raise InputFileError("--frames must be >= 10 and every thread count >= 1")
    options = BenchOptions(args.frames, threads, args.model, args.video)
    rows: list[BenchRow] = []
    for name in chosen:
        print(f"bench: {name} ...", file=sys.stderr, flush=True)
        rows.extend(sections[name].measure(options))
    if args.json:
        headline: dict[str, float] = {}
        for r in rows:
            headline.update(r.headline)
        print(json.dumps({**headline, "rows": [asdict(r) for r in rows]}))
        return 0
    print(f"{'section':<10} {'measure':<40} {'median':>9} {'p99':>9}  unit  target")
    for r in rows:
        p99 = f"{r.p99:9.3f}" if r.p99 is not None else " " * 9
        print(f"{r.section:<10} {r.name:<40} {r.median:9.3f} {p99}  {r.unit:<4}  {r.target}")
    return 0
