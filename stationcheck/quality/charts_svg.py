"""Charts as inline SVG text (no script, no external file): the review page and the offline
report show the same pictures. Dark ink on a white panel, so they read on any page; marks that
carry a meaning are doubled by a symbol or a word, never colour alone."""

from __future__ import annotations

import math
from collections.abc import Sequence
from html import escape

from stationcheck.quality.figures import CycleTimes, PositionCount, StationFigures
from stationcheck.quality.trends import Trend

WIDTH, HEIGHT = 560, 260
LEFT, RIGHT, TOP, BOTTOM = 56, 16, 28, 40
LABEL_BAND = 64  # under a trend: the serials of the units, slanted
MAX_LABELS = 40  # more units than this: every n-th is named
INK, GRID, BAR, LINE = "#222", "#ccc", "#4a6fa5", "#b5651d"
FAULT, ABNORMAL = "#c81e1e", "#a07800"


def _svg(title: str, body: list[str], width: int = WIDTH, height: int = HEIGHT) -> str:
    return (
        f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" '
        f'width="{width}" height="{height}" role="img" aria-label="{escape(title)}" '
        f'font-family="DejaVu Sans, Liberation Sans, sans-serif" font-size="11">'
        f'<rect width="{width}" height="{height}" fill="#fff"/>'
        f'<text x="{LEFT}" y="17" font-size="13" font-weight="bold" fill="{INK}">'
        f"{escape(title)}</text>{''.join(body)}</svg>"
    )


def nice_ticks(low: float, high: float, target: int = 5) -> list[float]:
    """Round tick values (1, 2, 2.5 or 5 times a power of ten apart) covering [low, high]."""
    if high <= low:
        high = low + 1.0
    raw = (high - low) / target
    magnitude = 10.0 ** math.floor(math.log10(raw))
    step = next(m * magnitude for m in (1.0, 2.0, 2.5, 5.0, 10.0) if m * magnitude >= raw)
    first = math.floor(low / step + 1e-9) * step
    count = math.ceil((high - first) / step - 1e-9)
    return [round(first + i * step, 10) for i in range(count + 1)]


def _fmt(value: float) -> str:
    if abs(value) >= 10_000:
        return f"{value / 1000:g}k"
    return f"{value:.3g}" if abs(value) < 1000 else f"{value:,.0f}"


def _empty(title: str, text: str) -> str:
    return _svg(
        title,
        [
            (
                f'<text x="{WIDTH / 2}" y="{HEIGHT / 2}" text-anchor="middle" '
                f'fill="{INK}">{escape(text)}</text>'
            )
        ],
    )


def _y_axis(ticks: list[float], plot_h: float, label: str = "") -> list[str]:
    out = []
    for value in ticks:
        y = TOP + plot_h - plot_h * value / ticks[-1]
        out.append(
            f'<line x1="{LEFT}" x2="{WIDTH - RIGHT}" y1="{y:.1f}" y2="{y:.1f}" '
            f'stroke="{GRID}"/><text x="{LEFT - 6}" y="{y + 4:.1f}" text-anchor="end" '
            f'fill="{INK}">{_fmt(value)}</text>'
        )
    if label:
        out.append(
            f'<text x="12" y="{TOP + plot_h / 2:.1f}" fill="{INK}" '
            f'transform="rotate(-90 12 {TOP + plot_h / 2:.1f})" text-anchor="middle">'
            f"{escape(label)}</text>"
        )
    return out


def pareto_svg(title: str, bars: Sequence[PositionCount], what: str = "count") -> str:
    """Bars in falling order with the cumulative share as a line (right axis 0-100 %)."""
    if not bars:
        return _empty(title, f"no {what} in this period")
    plot_w, plot_h = WIDTH - LEFT - RIGHT - 30, HEIGHT - TOP - BOTTOM
    ticks = nice_ticks(0.0, max(b.count for b in bars), 4)
    top = ticks[-1]
    slot = plot_w / len(bars)
    body = _y_axis(ticks, plot_h, label=what)
    points = []
    for i, bar in enumerate(bars):
        h = plot_h * bar.count / top
        x = LEFT + i * slot + slot * 0.15
        body.append(
            f'<rect x="{x:.1f}" y="{TOP + plot_h - h:.1f}" width="{slot * 0.7:.1f}" '
            f'height="{h:.1f}" fill="{BAR}"><title>{escape(bar.position)}: {bar.count}'
            f"</title></rect>"
        )
        body.append(
            f'<text x="{x + slot * 0.35:.1f}" y="{TOP + plot_h - h - 4:.1f}" '
            f'text-anchor="middle" fill="{INK}">{bar.count:,}</text>'
        )
        body.append(
            f'<text x="{x + slot * 0.35:.1f}" y="{TOP + plot_h + 15:.1f}" '
            f'text-anchor="middle" fill="{INK}">{escape(bar.position)}</text>'
        )
        points.append((LEFT + (i + 0.5) * slot, TOP + plot_h * (1 - bar.cumulative_share)))
    path = " ".join(f"{x:.1f},{y:.1f}" for x, y in points)
    body.append(f'<polyline points="{path}" fill="none" stroke="{LINE}" stroke-width="2"/>')
    body += [f'<circle cx="{x:.1f}" cy="{y:.1f}" r="3" fill="{LINE}"/>' for x, y in points]
    right = WIDTH - RIGHT - 24
    body += [
        f'<text x="{right}" y="{TOP + plot_h * (1 - s) + 4:.1f}" fill="{LINE}">'
        f"{int(s * 100)}%</text>"
        for s in (0.0, 0.5, 1.0)
    ]
    body.append(
        f'<text x="{LEFT}" y="{HEIGHT - 6}" fill="{INK}">bars: {escape(what)} per '
        f"fastener position; line: cumulative share</text>"
    )
    return _svg(title, body)


def histogram_svg(title: str, times: CycleTimes) -> str:
    if not times.count or not times.counts:
        return _empty(title, "no finished units in this period")
    plot_w, plot_h = WIDTH - LEFT - RIGHT, HEIGHT - TOP - BOTTOM
    ticks = nice_ticks(0.0, max(times.counts), 4)
    top = ticks[-1]
    edges = times.edges_s
    span = edges[-1] - edges[0] or 1.0
    body = _y_axis(ticks, plot_h, label="units")
    for i, count in enumerate(times.counts):
        x0 = LEFT + plot_w * (edges[i] - edges[0]) / span
        x1 = LEFT + plot_w * (edges[i + 1] - edges[0]) / span
        h = plot_h * count / top
        body.append(
            f'<rect x="{x0:.1f}" y="{TOP + plot_h - h:.1f}" width="{max(x1 - x0 - 1, 1):.1f}"'
            f' height="{h:.1f}" fill="{BAR}"><title>{_fmt(edges[i])}-'
            f"{_fmt(edges[i + 1])} s: {count}</title></rect>"
        )
    for i in range(0, len(edges), max(1, len(edges) // 6)):
        x = LEFT + plot_w * (edges[i] - edges[0]) / span
        body.append(
            f'<text x="{x:.1f}" y="{TOP + plot_h + 15}" text-anchor="middle" '
            f'fill="{INK}">{_fmt(edges[i])}</text>'
        )
    for label, value in (("median", times.median_s), ("p90", times.p90_s)):
        if value is not None and edges[0] <= value <= edges[-1]:
            x = LEFT + plot_w * (value - edges[0]) / span
            body.append(
                f'<line x1="{x:.1f}" x2="{x:.1f}" y1="{TOP}" y2="{TOP + plot_h}" '
                f'stroke="{LINE}" stroke-dasharray="4 3"/><text x="{x + 3:.1f}" '
                f'y="{TOP + 10}" fill="{LINE}">{label} {_fmt(value)} s</text>'
            )
    note = f"cycle time, s (first pass){'; ' + str(times.above) + ' slower units not shown' if times.above else ''}"
    body.append(f'<text x="{LEFT}" y="{HEIGHT - 6}" fill="{INK}">{escape(note)}</text>')
    return _svg(title, body)


def figure_charts(fig: StationFigures) -> dict[str, str]:
    """The station figures' charts, by name: NOK and retry Paretos, the cycle-time histogram."""
    return {
        "nok": pareto_svg("NOK results by fastener position", fig.nok_by_position, "NOK results"),
        "retries": pareto_svg("Retries by fastener position", fig.retries_by_position, "retries"),
        "cycle_time": histogram_svg("Cycle time distribution", fig.cycle_times),
    }


def trend_svg(trend: Trend, width: int = 1240, height: int = 470) -> str:
    """Final values (dots), the baseline centre and 3-sigma lines, the tolerance limits, the EWMA
    with its limits; values that break a run rule are ringed and numbered, EWMA signals
    marked with a triangle."""
    title = f"{trend.position}: final {trend.measure} ({trend.unit}), {len(trend.points)} units"
    values = trend.values
    if not values:
        return _empty(title, "no values in this period")
    low_tol, high_tol = trend.tolerance
    lines: list[float] = [v for v in (low_tol, high_tol) if v is not None]
    if trend.centre is not None and trend.sigma:
        lines += [trend.centre - 3.2 * trend.sigma, trend.centre + 3.2 * trend.sigma]
    ticks = nice_ticks(min([*values, *lines]), max([*values, *lines]))
    y_min, y_max = ticks[0], ticks[-1]
    top = TOP + (14 if trend.note else 0)
    plot_w, plot_h = width - LEFT - RIGHT, height - top - BOTTOM - LABEL_BAND
    n = len(values)

    def sx(i: float) -> float:
        return LEFT + plot_w * (i + 0.5) / n

    def sy(v: float) -> float:
        return top + plot_h * (y_max - v) / (y_max - y_min)

    body = []
    if trend.note:
        body.append(f'<text x="{LEFT}" y="{TOP + 6}" fill="{ABNORMAL}">{escape(trend.note)}</text>')
    every = max(1, math.ceil(n / MAX_LABELS))
    base_y = top + plot_h + 10
    for i in range(0, n, every):
        x = sx(i)
        body.append(
            f'<text x="{x:.1f}" y="{base_y:.1f}" font-size="9" fill="{INK}" '
            f'text-anchor="end" transform="rotate(-45 {x:.1f} {base_y:.1f})">'
            f"{escape(trend.points[i].serial)}</text>"
        )
    for v in ticks:
        body.append(
            f'<line x1="{LEFT}" x2="{width - RIGHT}" y1="{sy(v):.1f}" y2="{sy(v):.1f}" '
            f'stroke="{GRID}"/><text x="{LEFT - 6}" y="{sy(v) + 4:.1f}" '
            f'text-anchor="end" fill="{INK}">{_fmt(v)}</text>'
        )

    def hline(v: float, colour: str, dash: str, label: str) -> None:
        body.append(
            f'<line x1="{LEFT}" x2="{width - RIGHT}" y1="{sy(v):.1f}" y2="{sy(v):.1f}" '
            f'stroke="{colour}" stroke-dasharray="{dash}"/><text x="{width - RIGHT - 4}" '
            f'y="{sy(v) - 3:.1f}" text-anchor="end" fill="{colour}">{escape(label)}</text>'
        )

    for limit, word in ((low_tol, "low limit"), (high_tol, "high limit")):
        if limit is not None:
            hline(limit, FAULT, "8 4", f"{word} {_fmt(limit)}")
    if trend.centre is not None:
        hline(trend.centre, INK, "2 3", f"centre {_fmt(trend.centre)}")
        if trend.sigma:
            for sign in (-1, 1):
                hline(
                    trend.centre + sign * 3 * trend.sigma,
                    ABNORMAL,
                    "3 3",
                    f"{'+' if sign > 0 else '-'}3 sigma",
                )
    radius = 3.2 if n <= MAX_LABELS else 2.2 if n <= 600 else 1.4
    body += [
        f'<circle cx="{sx(i):.1f}" cy="{sy(v):.1f}" r="{radius}" fill="#555"><title>'
        f"{escape(trend.points[i].serial)}: {_fmt(v)} {escape(trend.unit)}</title></circle>"
        for i, v in enumerate(values)
    ]
    if trend.ewma is not None:
        chart = trend.ewma
        for series, colour in ((chart.statistics, LINE), (chart.upper, LINE), (chart.lower, LINE)):
            dash = "" if series is chart.statistics else ' stroke-dasharray="1 2"'
            path = " ".join(f"{sx(i):.1f},{sy(v):.1f}" for i, v in enumerate(series))
            body.append(
                f'<polyline points="{path}" fill="none" stroke="{colour}" '
                f'stroke-width="{2 if not dash else 1}"{dash}/>'
            )
        for i in chart.signals[:200]:
            x, y = sx(i), sy(chart.statistics[i])
            body.append(
                f'<path d="M{x:.1f},{y - 6:.1f} l5,9 h-10 z" fill="{FAULT}">'
                f"<title>EWMA outside its limits at unit {i + 1}</title></path>"
            )
    for hit in trend.rule_hits[:300]:
        x, y = sx(hit.index), sy(values[hit.index])
        body.append(
            f'<circle cx="{x:.1f}" cy="{y:.1f}" r="6" fill="none" stroke="{ABNORMAL}" '
            f'stroke-width="1.5"><title>{escape(trend.points[hit.index].serial)}: rule '
            f'{hit.rule}, {escape(hit.text)}</title></circle><text x="{x + 6:.1f}" '
            f'y="{y - 6:.1f}" fill="{ABNORMAL}" font-size="9">{hit.rule}</text>'
        )
    named = "each named below" if every == 1 else f"every {every}th named below"
    legend = (
        f"dots: final value per unit ({named}); orange line: EWMA (dotted: its limits); "
        "dashed red: tolerance; ringed number: run rule broken; triangle: EWMA signal"
    )
    body.append(f'<text x="{LEFT}" y="{height - 6}" fill="{INK}">{escape(legend)}</text>')
    return _svg(title, body, width, height)
