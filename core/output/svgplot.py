"""Small static line charts as inline SVG, for the self-contained HTML report.

The report must open offline with no script at all, so its charts are plain SVG: lines,
shaded bands between two lines, shaded x-ranges and vertical markers, with nice axis ticks
(Heckbert, "Nice numbers for graph labels", Graphics Gems, 1990). Every text is escaped.
Colours are the Okabe-Ito colour-blind-safe palette (Okabe & Ito 2008).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from html import escape

OKABE_ITO = ["#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442", "#000000"]


@dataclass
class Series:
    label: str
    x: list[float]
    y: list[float | None]
    colour: str = OKABE_ITO[0]
    dashed: bool = False
    markers: bool = False


@dataclass
class Band:
    label: str
    x: list[float]
    low: list[float | None]
    high: list[float | None]
    colour: str = OKABE_ITO[0]
    bars: bool = False  # draw an interval bar at each x instead of a shaded area


@dataclass
class Chart:
    title: str
    x_label: str
    y_label: str
    series: list[Series] = field(default_factory=list)
    bands: list[Band] = field(default_factory=list)
    x_regions: list[tuple[float, float, str]] = field(default_factory=list)  # (from, to, label)
    v_lines: list[tuple[float, str]] = field(default_factory=list)
    x_names: list[str] | None = None  # category names at x = 0, 1, 2, ... instead of numbers
    width: int = 960
    height: int = 540


def nice_ticks(low: float, high: float, count: int = 6) -> list[float]:
    if not (math.isfinite(low) and math.isfinite(high)):
        return []
    if high == low:
        high = low + 1.0
    span = _nice(high - low, round_it=False)
    step = _nice(span / (count - 1), round_it=True)
    start = math.floor(low / step) * step
    ticks = []
    value = start
    while value <= high + 0.5 * step:
        if value >= low - 1e-9 * abs(step):
            ticks.append(round(value, 12))
        value += step
    return ticks


def _nice(value: float, round_it: bool) -> float:
    exponent = math.floor(math.log10(value)) if value > 0 else 0
    fraction = value / 10**exponent
    if round_it:
        nice = 1 if fraction < 1.5 else 2 if fraction < 3 else 5 if fraction < 7 else 10
    else:
        nice = 1 if fraction <= 1 else 2 if fraction <= 2 else 5 if fraction <= 5 else 10
    return nice * 10**exponent


def _label(value: float) -> str:
    if value == 0:
        return "0"
    if abs(value) >= 10000:
        return f"{value:,.0f}"
    return f"{value:.6g}".replace("-", "\u2212")


def render(chart: Chart) -> str:
    """The chart as an <svg> element (a string)."""
    left, right, top, bottom = 90, 30, 70, 70
    plot_w, plot_h = chart.width - left - right, chart.height - top - bottom
    xs = [x for s in chart.series for x in s.x] + [x for b in chart.bands for x in b.x]
    ys = [y for s in chart.series for y in s.y if y is not None]
    ys += [v for b in chart.bands for v in (*b.low, *b.high) if v is not None]
    xs += [v for v, _ in chart.v_lines]
    if not xs or not ys:
        return ""
    x_ticks = nice_ticks(min(xs), max(xs)) if chart.x_names is None else [float(i) for i in range(len(chart.x_names))]
    if chart.x_names is not None:
        xs += [-0.5, len(chart.x_names) - 0.5]
    y_ticks = nice_ticks(min(ys), max(ys))
    x_lo, x_hi = min(min(xs), x_ticks[0]), max(max(xs), x_ticks[-1])
    y_lo, y_hi = min(min(ys), y_ticks[0]), max(max(ys), y_ticks[-1])
    x_span = (x_hi - x_lo) or 1.0
    y_span = (y_hi - y_lo) or 1.0

    def px(x: float) -> float:
        return left + (x - x_lo) / x_span * plot_w

    def py(y: float) -> float:
        return top + plot_h - (y - y_lo) / y_span * plot_h

    out = [
        f'<svg viewBox="0 0 {chart.width} {chart.height}" '
        f'width="100%" role="img" aria-label="{escape(chart.title)}" font-family="Helvetica, Arial, sans-serif">',
        f'<rect width="{chart.width}" height="{chart.height}" fill="#ffffff"/>',
        f'<text x="{left}" y="30" font-size="20" font-weight="600" fill="#1F2933">{escape(chart.title)}</text>',
    ]
    for start, end, label in chart.x_regions:
        a, b = px(max(start, x_lo)), px(min(end, x_hi))
        if b > a:
            out.append(f'<rect x="{a:.1f}" y="{top}" width="{b - a:.1f}" height="{plot_h}" fill="#CC79A7" fill-opacity="0.12"/>')
            out.append(f'<text x="{a + 4:.1f}" y="{top + 16}" font-size="13" fill="#882255">{escape(label)}</text>')
    for tick in y_ticks:
        y = py(tick)
        out.append(f'<line x1="{left}" x2="{left + plot_w}" y1="{y:.1f}" y2="{y:.1f}" stroke="#E4E7EB"/>')
        out.append(f'<text x="{left - 8}" y="{y + 5:.1f}" font-size="14" text-anchor="end" fill="#3E4C59">{_label(tick)}</text>')
    for tick in x_ticks:
        x = px(tick)
        out.append(f'<line x1="{x:.1f}" x2="{x:.1f}" y1="{top + plot_h}" y2="{top + plot_h + 5}" stroke="#3E4C59"/>')
        text = escape(chart.x_names[int(tick)]) if chart.x_names is not None else _label(tick)
        out.append(f'<text x="{x:.1f}" y="{top + plot_h + 22}" font-size="14" text-anchor="middle" fill="#3E4C59">{text}</text>')
    out.append(f'<line x1="{left}" x2="{left + plot_w}" y1="{top + plot_h}" y2="{top + plot_h}" stroke="#3E4C59"/>')
    for band in chart.bands:
        if band.bars:
            for x, lo, hi in zip(band.x, band.low, band.high, strict=True):
                if lo is not None and hi is not None:
                    out.append(
                        f'<line x1="{px(x):.1f}" x2="{px(x):.1f}" y1="{py(lo):.1f}" y2="{py(hi):.1f}" '
                        f'stroke="{band.colour}" stroke-width="3" stroke-opacity="0.5"/>'
                    )
            continue
        points = [(px(x), py(h)) for x, h in zip(band.x, band.high, strict=True) if h is not None]
        points += [(px(x), py(lo)) for x, lo in reversed(list(zip(band.x, band.low, strict=True))) if lo is not None]
        if points:
            path = " ".join(f"{a:.1f},{b:.1f}" for a, b in points)
            out.append(f'<polygon points="{path}" fill="{band.colour}" fill-opacity="0.18" stroke="none"/>')
    for series in chart.series:
        pts = [(px(x), py(y)) for x, y in zip(series.x, series.y, strict=True) if y is not None]
        if not pts:
            continue
        dash = ' stroke-dasharray="8 5"' if series.dashed else ""
        path = " ".join(f"{a:.1f},{b:.1f}" for a, b in pts)
        if not series.markers:
            out.append(f'<polyline points="{path}" fill="none" stroke="{series.colour}" stroke-width="3"{dash}/>')
        for a, b in pts if series.markers else []:
            out.append(f'<circle cx="{a:.1f}" cy="{b:.1f}" r="5" fill="{series.colour}"/>')
    for value, label in chart.v_lines:
        x = px(value)
        out.append(f'<line x1="{x:.1f}" x2="{x:.1f}" y1="{top}" y2="{top + plot_h}" stroke="#D55E00" stroke-dasharray="3 4"/>')
        near_right = x > left + 0.8 * plot_w
        anchor, shift = ("end", -4) if near_right else ("start", 4)
        out.append(
            f'<text x="{x + shift:.1f}" y="{top + plot_h - 6}" font-size="13" text-anchor="{anchor}" fill="#D55E00">{escape(label)}</text>'
        )
    out.append(
        f'<text x="{left + plot_w / 2:.1f}" y="{chart.height - 18}" font-size="15" text-anchor="middle" '
        f'fill="#1F2933">{escape(chart.x_label)}</text>'
    )
    out.append(
        f'<text transform="translate(22 {top + plot_h / 2:.1f}) rotate(-90)" font-size="15" text-anchor="middle" '
        f'fill="#1F2933">{escape(chart.y_label)}</text>'
    )
    legend_x = left
    for item in [*chart.series, *chart.bands]:
        colour = item.colour
        out.append(
            f'<rect x="{legend_x}" y="44" width="16" height="10" fill="{colour}" fill-opacity="{0.3 if isinstance(item, Band) else 1}"/>'
        )
        out.append(f'<text x="{legend_x + 22}" y="54" font-size="13" fill="#3E4C59">{escape(item.label)}</text>')
        legend_x += 30 + 7 * len(item.label)
    out.append("</svg>")
    return "\n".join(out)
