"""Station figures and trends as plain dicts for JSON (the web API and ``review --json``)."""

from __future__ import annotations

from dataclasses import asdict
from typing import Any

from stationcheck.quality.figures import StationFigures
from stationcheck.quality.trends import Trend


def _round(value: float | None, digits: int = 4) -> float | None:
    return None if value is None else round(value, digits)


def figures_dict(figures: StationFigures) -> dict[str, Any]:
    interval = figures.ftt_interval
    times = figures.cycle_times
    return {
        "period": {
            "from_s": figures.period.from_s,
            "to_s": figures.period.to_s,
            "text": figures.period.describe(),
        },
        "units": figures.units,
        "ok": figures.ok,
        "nok": figures.nok,
        "aborted": figures.aborted,
        "open": figures.open,
        "reworked": figures.reworked,
        "first_time_through": figures.first_time_through,
        "ended": figures.ended,  # first-time-through is counted over these; open ones apart
        "ftt_rate": _round(figures.ftt_rate, 6),
        "ftt_interval_95": [_round(interval.low, 6), _round(interval.high, 6)]
        if interval
        else None,
        "nok_results": figures.nok_results,
        "retries": figures.retries,
        "nok_by_position": [asdict(p) for p in figures.nok_by_position],
        "retries_by_position": [asdict(p) for p in figures.retries_by_position],
        "cycle_time": {
            "count": times.count,
            "mean_s": _round(times.mean_s),
            "min_s": _round(times.min_s),
            "max_s": _round(times.max_s),
            "median_s": _round(times.median_s),
            "p90_s": _round(times.p90_s),
            "resolution_s": times.resolution_s,
            "edges_s": [round(e, 4) for e in times.edges_s],
            "counts": list(times.counts),
            "above": times.above,
        },
        "alarms": [asdict(a) for a in figures.alarms],
    }


def trend_dict(trend: Trend) -> dict[str, Any]:
    ewma, cusum = trend.ewma, trend.cusum
    return {
        "position": trend.position,
        "measure": trend.measure,
        "unit": trend.unit,
        "count": len(trend.points),
        "tolerance": list(trend.tolerance),
        "left_nok": trend.left_nok,
        "baseline": trend.baseline,
        "centre": _round(trend.centre, 6),
        "sigma": _round(trend.sigma, 6),
        "note": trend.note,
        "points": [
            {"seq": p.seq, "serial": p.serial, "recorded_at_s": p.recorded_at_s, "value": p.value}
            for p in trend.points
        ],
        "ewma": None
        if ewma is None
        else {
            "weight": ewma.weight,
            "width": ewma.width,
            "statistics": [round(v, 6) for v in ewma.statistics],
            "lower": [round(v, 6) for v in ewma.lower],
            "upper": [round(v, 6) for v in ewma.upper],
            "signals": list(ewma.signals),
        },
        "cusum": None
        if cusum is None
        else {
            "k": _round(cusum.k, 6),
            "h": _round(cusum.h, 6),
            "signals": list(cusum.signals),
            "first_signal": cusum.first_signal,
        },
        "rule_hits": [
            {
                "index": h.index,
                "rule": h.rule,
                "side": h.side,
                "text": h.text,
                "serial": trend.points[h.index].serial,
            }
            for h in trend.rule_hits
        ],
    }


def trend_findings(trend: Trend) -> list[str]:
    """What a reviewer should look at, in words (empty when the charts see nothing)."""
    found = [trend.note] if trend.note else []
    if trend.left_nok:
        found.append(
            f"{trend.left_nok} unit(s) left NOK at this position in the same span "
            "(not charted; see NOK by position)"
        )
    if trend.sigma is None:
        return found
    first = trend.first_ewma_signal
    if first is not None:
        found.append(
            f"EWMA outside its limits from unit {trend.points[first].serial} "
            f"({len(trend.ewma.signals) if trend.ewma else 0} of {len(trend.points)})"
        )
    if trend.cusum is not None and trend.cusum.first_signal is not None:
        index = trend.cusum.first_signal
        side = "up" if trend.cusum.upper_sums[index] > trend.cusum.h else "down"
        found.append(f"CUSUM signals a shift {side} at unit {trend.points[index].serial}")
    rules = sorted({h.rule for h in trend.rule_hits})
    if rules:
        found.append(
            f"run rules broken: {', '.join(str(r) for r in rules)} ({len(trend.rule_hits)} hits)"
        )
    return found
