"""Trends per fastener position: the final OK torque or angle of each unit in log order (the
result that completed the position), with an EWMA chart, a tabular CUSUM and the Western
Electric rules, so a drift inside the tolerance band (a loosening tool, a worn socket) shows
before parts fail. Positions left NOK are counted, not charted: they are failures already, and
their values far outside the band would hide the drift the charts are for.

The centre line and sigma come from the first values of the window (the baseline, taken as in
control): centre = their mean, sigma = their moving-range sigma. A short window is still drawn
(from 3 values: a baseline of at least 2), with a note that its limits are rough until
``MIN_POINTS`` values and which run rules cannot fire yet. Chart settings are common
practice, no source: EWMA lambda 0.2 with 3-sigma limits; CUSUM k = sigma / 2, h = 5 sigma.
"""

from __future__ import annotations

import sqlite3
from dataclasses import dataclass, field, replace
from typing import Literal

from stationcheck.quality.control_charts import (
    CusumChart,
    EwmaChart,
    cusum_chart,
    ewma_chart,
    moving_range_sigma,
)
from stationcheck.quality.period import Period
from stationcheck.quality.run_rules import RuleHit, western_electric

Measure = Literal["torque", "angle"]
MEASURES: dict[str, tuple[str, str, str, str]] = {
    # measure: (value column, low column, high column, unit)
    "torque": ("torque_nm", "torque_low_nm", "torque_high_nm", "N·m"),
    "angle": ("angle_deg", "angle_low_deg", "angle_high_deg", "°"),
}
DEFAULT_POINTS = 500
MAX_POINTS = 5000
BASELINE_POINTS = 100
MIN_POINTS = 10  # fewer: the charts are drawn, but their limits are called rough
DRAW_POINTS = 3  # fewer: dots only (a baseline of 2 and something to compare with it)
RULE_NEEDS = {2: 3, 3: 5, 4: 8}  # Western Electric rule -> values in a row it looks at
EWMA_WEIGHT = 0.2
EWMA_WIDTH = 3.0
CUSUM_K_SIGMA = 0.5
CUSUM_H_SIGMA = 5.0


@dataclass(frozen=True)
class PositionInfo:
    position: str
    number: int | None


@dataclass(frozen=True)
class TrendPoint:
    seq: int
    serial: str
    recorded_at_s: float
    value: float


@dataclass(frozen=True)
class Trend:
    """One position's final values and what the charts say about them. ``note`` explains why
    there are no charts (too few values, no spread)."""

    position: str
    measure: str
    unit: str
    points: tuple[TrendPoint, ...]
    tolerance: tuple[float | None, float | None] = (None, None)
    left_nok: int = 0  # positions decided NOK in the same span, not charted
    baseline: int = 0
    centre: float | None = None
    sigma: float | None = None
    ewma: EwmaChart | None = None
    cusum: CusumChart | None = None
    rule_hits: tuple[RuleHit, ...] = field(default_factory=tuple)
    note: str = ""

    @property
    def values(self) -> tuple[float, ...]:
        return tuple(p.value for p in self.points)

    @property
    def first_ewma_signal(self) -> int | None:
        return self.ewma.signals[0] if self.ewma and self.ewma.signals else None


def fastener_positions(conn: sqlite3.Connection) -> tuple[PositionInfo, ...]:
    """Every fastener position in the log, in the station's numbering: one index seek per
    position (a skip scan), however many steps the log holds."""
    rows = conn.execute(
        "WITH RECURSIVE p(position) AS ("
        " SELECT min(position) FROM steps INDEXED BY steps_final_at"
        "  WHERE kind = 'fasten' AND position_result IS NOT NULL"
        " UNION ALL SELECT (SELECT min(position) FROM steps INDEXED BY steps_final_at"
        "  WHERE kind = 'fasten' AND position_result IS NOT NULL AND position > p.position)"
        " FROM p WHERE p.position IS NOT NULL)"
        " SELECT position, (SELECT position_number FROM steps INDEXED BY steps_final_at"
        "  WHERE kind = 'fasten' AND position_result IS NOT NULL AND position = p.position"
        "  LIMIT 1) FROM p WHERE position IS NOT NULL"
    ).fetchall()
    found = [PositionInfo(str(p), int(n) if n is not None else None) for p, n in rows]
    return tuple(sorted(found, key=lambda i: (i.number is None, i.number or 0, i.position)))


def position_trend(
    conn: sqlite3.Connection,
    position: str,
    measure: str = "torque",
    period: Period | None = None,
    points: int = DEFAULT_POINTS,
) -> Trend:
    """The latest ``points`` final values of ``position`` in the period, oldest first."""
    if measure not in MEASURES:
        raise ValueError(f"measure must be one of {sorted(MEASURES)}, got {measure!r}")
    if not 1 <= points <= MAX_POINTS:
        raise ValueError(f"points must be in 1..{MAX_POINTS}, got {points!r}")
    column, low_col, high_col, unit = MEASURES[measure]
    start, end = (period or Period()).bounds
    final = (
        "FROM steps INDEXED BY steps_final_at WHERE kind = 'fasten' AND position_result = ? "
        "AND position = ? AND recorded_at_s >= ? AND recorded_at_s < ?"
    )
    rows = conn.execute(
        f"SELECT seq, serial, recorded_at_s, {column}, {low_col}, {high_col} {final} "
        f"AND {column} IS NOT NULL ORDER BY recorded_at_s DESC, seq DESC LIMIT ?",
        ("OK", position, start, end, points),
    ).fetchall()
    rows.reverse()
    series = tuple(TrendPoint(int(r[0]), str(r[1]), float(r[2]), float(r[3])) for r in rows)
    tolerance = (rows[-1][4], rows[-1][5]) if rows else (None, None)
    first_s = series[0].recorded_at_s if series else start
    left_nok = conn.execute(
        f"SELECT count(*) {final}", ("NotOK", position, first_s, end)
    ).fetchone()[0]
    return analyse(Trend(position, measure, unit, series, tolerance, int(left_nok)))


def short_window_note(count: int, baseline: int) -> str:
    """What a window of fewer than ``MIN_POINTS`` values can and cannot say."""
    if count < DRAW_POINTS:
        return (
            f"only {count} value{'s' if count != 1 else ''}: dots only; the EWMA, CUSUM "
            f"and run rules need at least {DRAW_POINTS} (and {MIN_POINTS} to be trusted)"
        )
    waiting = [str(rule) for rule, needs in RULE_NEEDS.items() if count < needs]
    rules = (
        ""
        if not waiting
        else (
            f"; run rule {waiting[0]} needs more values in a row"
            if len(waiting) == 1
            else f"; run rules {', '.join(waiting)} need more values in a row"
        )
    )
    return (
        f"only {count} values: EWMA and CUSUM limits from the first {baseline} are rough "
        f"until at least {MIN_POINTS} values{rules}"
    )


def analyse(trend: Trend) -> Trend:
    values = trend.values
    if len(values) < DRAW_POINTS:
        return replace(trend, note=short_window_note(len(values), 0))
    baseline = max(2, min(BASELINE_POINTS, len(values) // 2))
    note = short_window_note(len(values), baseline) if len(values) < MIN_POINTS else ""
    reference = values[:baseline]
    sigma = moving_range_sigma(reference)
    centre = sum(reference) / baseline
    if sigma <= 0.0:
        flat = "the baseline values do not vary; no limits can be set"
        return replace(
            trend, baseline=baseline, centre=centre, note=f"{note}; {flat}" if note else flat
        )
    return replace(
        trend,
        baseline=baseline,
        centre=centre,
        sigma=sigma,
        note=note,
        ewma=ewma_chart(values, centre, sigma, EWMA_WEIGHT, EWMA_WIDTH),
        cusum=cusum_chart(values, centre, CUSUM_K_SIGMA * sigma, CUSUM_H_SIGMA * sigma),
        rule_hits=western_electric(values, centre, sigma),
    )
