"""Station figures over a period, from aggregate queries in SQLite over indexes (nothing loads
the units or steps of the period into memory).

Units count by their first-pass start (``started_at_s``); NOK results, retries and alarms by the
time they were recorded. First-time-through: units whose first pass ended OK with no retry and
no rework pass, over the units that ended (a unit still open has not had its chance yet; open
units are counted apart).

The aggregates are additive (:class:`Tally`), so a long period can be summed from per-day
tallies kept by :mod:`stationcheck.quality.rollup` plus two partial days at its ends.
"""

from __future__ import annotations

import sqlite3
from collections import Counter
from collections.abc import Callable, Iterable
from dataclasses import dataclass, field

from stationcheck.quality.period import Period
from stationcheck.quality.proportion import Interval, wilson_interval
from stationcheck.quality.trends import fastener_positions

CYCLE_BINS = 24
CYCLE_RESOLUTION_S = 0.1  # fine bins the quantiles are read from
DAY_S = 86_400
UNIT_COUNTS = ("units", "ok", "nok", "aborted", "open", "reworked", "first_time_through")


@dataclass
class Tally:
    """Additive aggregates of one stretch of time (a day, or the ends of a period)."""

    counts: Counter[str] = field(default_factory=Counter)  # UNIT_COUNTS
    cycle_bins: Counter[int] = field(default_factory=Counter)  # cycle time // resolution
    cycle_sum_s: float = 0.0
    cycle_min_s: float | None = None
    cycle_max_s: float | None = None
    nok_by_position: Counter[str] = field(default_factory=Counter)
    retries_by_position: Counter[str] = field(default_factory=Counter)
    alarms: Counter[str] = field(default_factory=Counter)
    unit_alarms: Counter[str] = field(default_factory=Counter)

    def add(self, other: Tally) -> None:
        self.counts.update(other.counts)
        self.cycle_bins.update(other.cycle_bins)
        self.cycle_sum_s += other.cycle_sum_s
        self.cycle_min_s = _pick(min, self.cycle_min_s, other.cycle_min_s)
        self.cycle_max_s = _pick(max, self.cycle_max_s, other.cycle_max_s)
        self.nok_by_position.update(other.nok_by_position)
        self.retries_by_position.update(other.retries_by_position)
        self.alarms.update(other.alarms)
        self.unit_alarms.update(other.unit_alarms)


def _pick(
    choose: Callable[[float, float], float], a: float | None, b: float | None
) -> float | None:
    return b if a is None else a if b is None else choose(a, b)


@dataclass(frozen=True)
class PositionCount:
    """One bar of a Pareto chart: a fastener position, its count and its share of all."""

    position: str
    number: int | None
    count: int
    share: float
    cumulative_share: float


@dataclass(frozen=True)
class CycleTimes:
    """Cycle times of the first passes that ended. The quantiles come from fine bins
    (``resolution_s`` wide), not from sorting every value."""

    count: int
    mean_s: float | None = None
    min_s: float | None = None
    max_s: float | None = None
    median_s: float | None = None
    p90_s: float | None = None
    resolution_s: float = CYCLE_RESOLUTION_S
    edges_s: tuple[float, ...] = ()  # display bins: CYCLE_BINS + 1 edges
    counts: tuple[int, ...] = ()
    above: int = 0  # beyond the last edge (the slowest 1 %)


@dataclass(frozen=True)
class AlarmCount:
    code: str
    count: int
    of_units: int  # raised for a unit (the rest are the station's own)


@dataclass(frozen=True)
class StationFigures:
    period: Period
    units: int
    ok: int
    nok: int
    aborted: int
    open: int
    reworked: int
    first_time_through: int
    nok_results: int
    retries: int
    nok_by_position: tuple[PositionCount, ...]
    retries_by_position: tuple[PositionCount, ...]
    cycle_times: CycleTimes
    alarms: tuple[AlarmCount, ...]

    @property
    def ended(self) -> int:
        """Units that ended (OK, NOK or aborted): what first-time-through is counted over."""
        return self.units - self.open

    @property
    def ftt_rate(self) -> float | None:
        return self.first_time_through / self.ended if self.ended else None

    @property
    def ftt_interval(self) -> Interval | None:
        """95 % Wilson score interval of the first-time-through rate."""
        return wilson_interval(self.first_time_through, self.ended) if self.ended else None


def _day(column: str, by_day: bool) -> str:
    return f"CAST({column} / {DAY_S} AS INTEGER)" if by_day else "0"


def tally_range(
    conn: sqlite3.Connection, start: float, end: float, by_day: bool = False
) -> dict[int, Tally]:
    """Aggregates of [start, end): one tally, or one per UTC day (day number -> tally)."""
    tallies: dict[int, Tally] = {}

    def get(day: int) -> Tally:
        return tallies.setdefault(int(day), Tally())

    span = (start, end)
    for row in conn.execute(
        f"SELECT {_day('started_at_s', by_day)} AS d, count(*), total(status = 'OK'), "
        "total(status = 'NotOK'), total(status = 'NotDecidable'), total(status = 'open'), "
        "total(reworked), total(first_time_through), total(cycle_time_s), min(cycle_time_s), "
        "max(cycle_time_s) FROM units "
        "INDEXED BY units_figures WHERE started_at_s >= ? AND started_at_s < ? GROUP BY d",
        span,
    ):
        tally = get(row[0])
        tally.counts.update(dict(zip(UNIT_COUNTS, (int(v) for v in row[1:8]), strict=True)))
        tally.cycle_sum_s += float(row[8])
        tally.cycle_min_s = _pick(min, tally.cycle_min_s, row[9])
        tally.cycle_max_s = _pick(max, tally.cycle_max_s, row[10])
    for day, cycle_bin, n in conn.execute(
        f"SELECT {_day('started_at_s', by_day)} AS d, CAST(cycle_time_s / ? AS INTEGER) AS b, "
        "count(*) FROM units INDEXED BY units_figures WHERE started_at_s >= ? AND "
        "started_at_s < ? AND cycle_time_s IS NOT NULL GROUP BY d, b",
        (CYCLE_RESOLUTION_S, *span),
    ):
        get(day).cycle_bins[int(cycle_bin)] += int(n)
    for index, condition, attribute in (
        ("steps_nok_at", "result = 'NotOK'", "nok_by_position"),
        ("steps_retry_at", "attempt > 1", "retries_by_position"),
    ):
        for day, position, n in conn.execute(
            f"SELECT {_day('recorded_at_s', by_day)} AS d, position, count(*) FROM steps "
            f"INDEXED BY {index} WHERE kind = 'fasten' AND {condition} AND recorded_at_s >= ? "
            "AND recorded_at_s < ? GROUP BY d, position",
            span,
        ):
            getattr(get(day), attribute)[str(position or "?")] += int(n)
    for day, code, n, of_units in conn.execute(
        f"SELECT {_day('recorded_at_s', by_day)} AS d, code, count(*), count(serial) FROM alarms "
        "INDEXED BY alarms_code_at WHERE recorded_at_s >= ? AND recorded_at_s < ? "
        "GROUP BY d, code",
        span,
    ):
        tally = get(day)
        tally.alarms[str(code)] += int(n)
        tally.unit_alarms[str(code)] += int(of_units)
    return tallies


def position_numbers(conn: sqlite3.Connection) -> dict[str, int | None]:
    """Each fastener position's number in the station's numbering (None when it has none)."""
    return {info.position: info.number for info in fastener_positions(conn)}


def station_figures(conn: sqlite3.Connection, period: Period) -> StationFigures:
    """The figures of the period straight from the log (one pass over its index ranges)."""
    tallies = tally_range(conn, *period.bounds).values()
    return figures_of(period, tallies, position_numbers(conn).get)


NumberOf = Callable[[str], int | None]


def figures_of(period: Period, tallies: Iterable[Tally], number_of: NumberOf) -> StationFigures:
    """Sum the tallies into the figures; ``number_of(position)`` gives a position's number."""
    total = Tally()
    for tally in tallies:
        total.add(tally)
    counts = total.counts
    nok_bars = _pareto(total.nok_by_position, number_of)
    retry_bars = _pareto(total.retries_by_position, number_of)
    alarms = sorted(total.alarms.items(), key=lambda a: (-a[1], a[0]))
    return StationFigures(
        period=period,
        units=counts["units"],
        ok=counts["ok"],
        nok=counts["nok"],
        aborted=counts["aborted"],
        open=counts["open"],
        reworked=counts["reworked"],
        first_time_through=counts["first_time_through"],
        nok_results=sum(b.count for b in nok_bars),
        retries=sum(b.count for b in retry_bars),
        nok_by_position=nok_bars,
        retries_by_position=retry_bars,
        cycle_times=cycle_times(
            total.cycle_bins, total.cycle_sum_s, (total.cycle_min_s, total.cycle_max_s)
        ),
        alarms=tuple(AlarmCount(code, n, total.unit_alarms[code]) for code, n in alarms if n),
    )


def _pareto(counts: Counter[str], number_of: NumberOf) -> tuple[PositionCount, ...]:
    ordered = sorted(((p, n) for p, n in counts.items() if n), key=lambda r: (-r[1], r[0]))
    total = sum(n for _, n in ordered)
    bars, running = [], 0
    for position, count in ordered:
        running += count
        bars.append(
            PositionCount(position, number_of(position), count, count / total, running / total)
        )
    return tuple(bars)


def cycle_times(
    bins: Counter[int], sum_s: float, extremes: tuple[float | None, float | None] = (None, None)
) -> CycleTimes:
    """Cycle-time figures from fine bins: quantiles to one bin, display bins from the fastest
    up to the 99th percentile (slower ones counted in ``above``)."""
    fine = sorted((b, n) for b, n in bins.items() if n)
    count = sum(n for _, n in fine)
    if not count:
        return CycleTimes(0)
    step = CYCLE_RESOLUTION_S

    def quantile(share: float) -> float:
        wanted, seen = share * count, 0
        for b, n in fine:
            if seen + n >= wanted:
                return (b + (wanted - seen) / n) * step
            seen += n
        return (fine[-1][0] + 1) * step

    low, high = fine[0][0] * step, (fine[-1][0] + 1) * step
    top = min(high, quantile(0.99))
    width = max((top - low) / CYCLE_BINS, step)
    edges = tuple(low + i * width for i in range(CYCLE_BINS + 1))
    shown = [0] * CYCLE_BINS
    above = 0
    for b, n in fine:
        slot = int(((b + 0.5) * step - low) // width)
        if slot < CYCLE_BINS:
            shown[slot] += n
        else:
            above += n
    fastest = extremes[0] if extremes[0] is not None else low
    slowest = extremes[1] if extremes[1] is not None else high
    return CycleTimes(
        count,
        sum_s / count,
        fastest,
        slowest,
        min(max(quantile(0.5), fastest), slowest),
        min(max(quantile(0.9), fastest), slowest),
        step,
        edges,
        tuple(shown),
        above,
    )
