"""What every bench section shares: its options, its rows and the process's memory.

Sections are modules listed in :data:`SECTION_MODULES`; each defines ``SECTION_NAME`` (str),
``SECTION_HELP`` (str) and ``measure(options: BenchOptions) -> list[BenchRow]``. A row's
``headline`` figures become top-level keys of ``--json`` (e.g. ``full_path_fps``,
``detector_ms_median``, ``decision_latency_p99_ms``, ``rss_mb``). To add one,
write the module and append its dotted name here. Benchmarks measure; they never assert (timed
tests are flaky on a shared machine), so targets are printed beside the figures instead.
"""

from __future__ import annotations

import importlib
import resource
from dataclasses import dataclass, field
from pathlib import Path
from types import ModuleType

SECTION_MODULES: tuple[str, ...] = (
    "stationcheck.benches.bench_detector",
    "stationcheck.benches.bench_pipeline",
    "stationcheck.benches.bench_store",
    "stationcheck.benches.bench_review",
    "stationcheck.benches.bench_judgements",
    "stationcheck.benches.bench_live",
    "stationcheck.benches.bench_screen",
    "stationcheck.benches.bench_flood",
    "stationcheck.benches.bench_plant",
)


@dataclass(frozen=True)
class BenchOptions:
    frames: int | None = None  # None: each section's own default

    def frames_or(self, default: int) -> int:
        return self.frames if self.frames is not None else default

    threads: tuple[int, ...] = (1, 2)
    model: Path | None = None
    video: Path | None = None


@dataclass(frozen=True)
class BenchRow:
    """One measured figure: ``median``/``p99`` in ``unit`` (p99 None for a single value)."""

    section: str
    name: str
    median: float
    p99: float | None
    unit: str
    target: str = ""
    extra: dict[str, float] = field(default_factory=dict)
    headline: dict[str, float] = field(default_factory=dict)  # top-level keys of --json


def resident_memory_mb() -> tuple[float, float]:
    """(current, peak) resident set size of this process in MB (Linux /proc; peak from
    getrusage, which Linux reports in kB)."""
    current = float("nan")
    try:
        with open("/proc/self/status") as status:
            for line in status:
                if line.startswith("VmRSS:"):
                    current = float(line.split()[1]) / 1024.0
    except OSError:
        pass
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0
    return current, peak


def load_sections() -> dict[str, ModuleType]:
    sections = {}
    for dotted in SECTION_MODULES:
        module = importlib.import_module(dotted)
        sections[str(module.SECTION_NAME)] = module
    return sections
