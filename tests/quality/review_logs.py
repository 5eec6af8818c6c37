"""Step logs for review tests, made by the real sequencer from scripted station observations
(demo data), and the figures a replay summary implies, for comparing with the review's.
Imported by name: a module name unique across test folders."""

from __future__ import annotations

import statistics
from collections import Counter
from collections.abc import Sequence
from dataclasses import dataclass, field
from pathlib import Path

import pytest

from stationcheck.core.events import Event
from stationcheck.core.sequencer import Sequencer
from stationcheck.pipeline.summary import UnitPass, summarise_units
from stationcheck.quality.figures import StationFigures
from stationcheck.store import SqliteStepLog
from stationcheck.store.synthetic import POSITIONS, StationScript, demo_plan

RECORDED_AT_S = 1_760_000_000.0  # wall clock of the first event; events keep their spacing


def scripted_units(script: StationScript) -> StationScript:
    """Five units (DEMO DATA): clean; a retry at p3; p5 NOK twice, left for rework and reworked;
    a wrong position first; one aborted. 200 s apart on the wall clock."""
    script.unit("QA-0001", {})
    script.frames(None, 200)
    script.unit("QA-0002", {"p3": 1})
    script.frames(None, 200)
    script.unit("QA-0003", {"p5": 2}).frames(None, 2000).unit("QA-0003", {}, ("p5",))
    script.frames(None, 200)
    script.start("QA-0004").frames(None, 100).pick("bin_gasket").pick("bin_cover")
    script.frames(POSITIONS[1], 500).fasten(POSITIONS, {}).verdict("present")
    script.frames(None, 200)
    script.start("QA-0005").frames(None, 100).pick("bin_gasket").frames(None, 500)
    return script.abort("unit taken off the fixture")


def sequencer_events(script: StationScript) -> list[tuple[Event, ...]]:
    sequencer = Sequencer(demo_plan())
    state = sequencer.initial_state()
    batches = []
    for observation in script.observations:
        state, _, events = sequencer.step(state, observation)
        if events:
            batches.append(events)
    return batches


def write_log(path: Path, batches: Sequence[tuple[Event, ...]],
              spread_s: float = 100.0) -> Path:
    """Append the batches as the station would; the wall clock runs ``spread_s`` times faster
    than the events' own time, so units land minutes apart."""
    with SqliteStepLog(path, synchronous="OFF") as log:
        for batch in batches:
            log.append(batch, RECORDED_AT_S + batch[0].t_s * spread_s)
    return path


@dataclass(frozen=True)
class SummaryFigures:
    """What the replay's per-unit summary says, in the review's terms."""

    units: int
    ok: int
    open: int
    reworked: int
    first_time_through: int
    nok_results: int
    failed_positions: Counter[str] = field(default_factory=Counter)
    alarms: Counter[str] = field(default_factory=Counter)
    first_pass_cycle_s: tuple[float, ...] = ()


def summary_figures(passes: Sequence[UnitPass]) -> SummaryFigures:
    by_serial: dict[str, list[UnitPass]] = {}
    for p in passes:
        by_serial.setdefault(p.serial, []).append(p)
    return SummaryFigures(
        units=len(by_serial),
        ok=sum(1 for ps in by_serial.values() if ps[-1].result == "OK"),
        open=sum(1 for ps in by_serial.values() if ps[-1].ended_by == "open_at_end"),
        reworked=sum(1 for ps in by_serial.values() if any(p.rework for p in ps)),
        first_time_through=sum(1 for ps in by_serial.values() if len(ps) == 1 and
                               ps[0].result == "OK" and ps[0].nok_results == 0),
        nok_results=sum(p.nok_results for p in passes),
        failed_positions=Counter(z for p in passes for z in p.failed_positions),
        alarms=Counter(a for p in passes for a in p.alarms),
        first_pass_cycle_s=tuple(p.cycle_time_s for p in passes
                                 if not p.rework and p.ended_by != "open_at_end"),
    )


def summary_of(batches: Sequence[tuple[Event, ...]]) -> SummaryFigures:
    return summary_figures(summarise_units(e for b in batches for e in b))


def figures_agree(review: StationFigures, summary: SummaryFigures) -> None:
    """The review's figures say what the replay summary says about the same units."""
    assert review.units == summary.units
    assert review.ok == summary.ok
    assert review.open == summary.open
    assert review.reworked == summary.reworked
    assert review.first_time_through == summary.first_time_through
    assert review.nok_results == summary.nok_results
    unit_alarms = {a.code: a.of_units for a in review.alarms if a.of_units}
    assert unit_alarms == dict(summary.alarms)
    cycle = review.cycle_times
    assert cycle.count == len(summary.first_pass_cycle_s)
    assert cycle.mean_s == pytest.approx(statistics.fmean(summary.first_pass_cycle_s), abs=1e-3)
    assert cycle.max_s == pytest.approx(max(summary.first_pass_cycle_s), abs=1e-3)
    assert cycle.min_s == pytest.approx(min(summary.first_pass_cycle_s), abs=1e-3)
    # the review reads quantiles off a fine histogram: the lower median, to one bin
    assert cycle.median_s == pytest.approx(statistics.median_low(summary.first_pass_cycle_s),
                                           abs=cycle.resolution_s + 1e-3)
