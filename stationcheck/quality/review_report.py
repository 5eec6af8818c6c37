"""A standalone HTML report of a period: figures, Pareto charts, cycle times, alarms and the
trend of every fastener position, charts inline as SVG. One file, no script, nothing fetched:
it opens offline and prints."""

from __future__ import annotations

import sqlite3
import time
from html import escape
from pathlib import Path

from stationcheck.core.result_words import VOCABULARY_NOTE
from stationcheck.quality.charts_svg import figure_charts, trend_svg
from stationcheck.quality.figures import StationFigures, station_figures
from stationcheck.quality.json_views import trend_findings
from stationcheck.quality.period import Period, format_time
from stationcheck.quality.report_units import log_is_demo, units_section
from stationcheck.quality.trends import DEFAULT_POINTS, fastener_positions, position_trend

__all__ = ["build_report", "log_is_demo"]

CAUTION_FILE = Path(__file__).resolve().parents[1] / "web" / "static" / "common" / "caution.html"
FALLBACK_CAUTION = (
    "<strong>Safety:</strong> tool enable/inhibit is an error-proofing aid for "
    "quality, not a safety function."
)
STYLE = """
body { font-family: "DejaVu Sans", "Liberation Sans", sans-serif; margin: 24px; color: #222;
  max-width: 1200px; }
.demo { border: 2px solid #a07800; background: #fff5cc; padding: 6px 10px; font-weight: bold; }
table.units td, table.units th { text-align: left; vertical-align: top; }
table.units td:first-child, table.units td:last-child { white-space: nowrap; }
h1 { font-size: 1.4rem; margin-bottom: 0; } h2 { font-size: 1.15rem; margin-top: 28px; }
h3 { font-size: 1rem; margin-bottom: 4px; }
.meta, .caution { color: #555; font-size: 0.85rem; }
table { border-collapse: collapse; margin: 8px 0; }
td, th { border: 1px solid #bbb; padding: 3px 8px; text-align: right; }
th { background: #eee; } td:first-child, th:first-child { text-align: left; }
.charts { display: flex; flex-wrap: wrap; gap: 12px; }
svg { border: 1px solid #ccc; max-width: 100%; height: auto; }
.finding { color: #7a5a00; } .finding::before { content: "\\26A0  "; }
.calm::before { content: "\\2713  "; }
"""


def _caution() -> str:
    try:
        return CAUTION_FILE.read_text(encoding="utf-8").strip()
    except OSError:
        return FALLBACK_CAUTION


def _percent(value: float | None) -> str:
    return "-" if value is None else f"{100.0 * value:.1f} %"


def _figures_table(fig: StationFigures) -> str:
    interval = fig.ftt_interval
    ftt = _percent(fig.ftt_rate)
    if interval is not None:
        ftt += f" (95 % Wilson interval {_percent(interval.low)} to {_percent(interval.high)})"
    times = fig.cycle_times
    rows = [
        ("units started", f"{fig.units:,}"),
        ("OK (released)", f"{fig.ok:,}"),
        ("NOK", f"{fig.nok:,}"),
        ("aborted", f"{fig.aborted:,}"),
        ("open (not finished; not in first-time-through)", f"{fig.open:,}"),
        ("reworked", f"{fig.reworked:,}"),
        ("first-time-through", f"{fig.first_time_through:,} of {fig.ended:,} ended units = {ftt}"),
        ("NOK tightening results", f"{fig.nok_results:,}"),
        ("retries", f"{fig.retries:,}"),
        (
            "cycle time median / p90",
            "-" if times.median_s is None else f"{times.median_s:.1f} s / {times.p90_s or 0:.1f} s",
        ),
    ]
    cells = "".join(f"<tr><td>{escape(k)}</td><td>{escape(v)}</td></tr>" for k, v in rows)
    return f"<table>{cells}</table>"


def _alarms_table(fig: StationFigures) -> str:
    if not fig.alarms:
        return "<p>No alarms in this period.</p>"
    rows = "".join(
        f"<tr><td>{escape(a.code)}</td><td>{a.count:,}</td><td>{a.of_units:,}</td></tr>"
        for a in fig.alarms
    )
    return f"<table><tr><th>alarm</th><th>count</th><th>of units</th></tr>{rows}</table>"


def build_report(
    conn: sqlite3.Connection,
    period: Period,
    log_name: str,
    figures: StationFigures | None = None,
    points: int = DEFAULT_POINTS,
) -> str:
    fig = figures if figures is not None else station_figures(conn, period)
    parts = [
        '<!DOCTYPE html><html lang="en"><head><meta charset="utf-8">',
        f"<title>stationcheck review report: {escape(log_name)}</title>",
        f"<style>{STYLE}</style></head><body>",
        "<h1>Station review report</h1>",
        *(
            [
                (
                    '<p class="demo">\u26a0 DEMO DATA: the units in this step log come from the '
                    "demo, an invented station.</p>"
                )
            ]
            if log_is_demo(conn)
            else []
        ),
        (
            f'<p class="meta">Step log {escape(log_name)}; period {escape(period.describe())}; '
            f"made {escape(format_time(time.time()))} by stationcheck review.</p>"
        ),
        "<h2>Figures</h2>",
        _figures_table(fig),
        '<div class="charts">',
        *figure_charts(fig).values(),
        "</div>",
        *units_section(conn, period),
        "<h2>Alarms by kind</h2>",
        _alarms_table(fig),
        f"<h2>Trends per fastener position (latest {points} units each)</h2>",
    ]
    for info in fastener_positions(conn):
        for measure in ("torque", "angle"):
            trend = position_trend(conn, info.position, measure, period, points)
            findings = trend_findings(trend)
            parts.append(f"<h3>{escape(info.position)}: {measure}</h3>")
            parts += [f'<p class="finding">{escape(f)}</p>' for f in findings] or [
                '<p class="calm">no signal: within its control limits and run rules</p>'
            ]
            if trend.points:
                parts.append(trend_svg(trend))
    parts.append(f'<p class="meta">{escape(VOCABULARY_NOTE)}</p>')
    parts.append(f'<p class="caution">{_caution()}</p></body></html>')
    return "\n".join(parts)
