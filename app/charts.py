"""Plotly figures for the app (no streamlit import, so figures can be built and tested alone).

Colours are the Okabe–Ito palette (Okabe & Ito 2008, "Color Universal Design"), which stays
distinguishable under the common forms of colour-vision deficiency; line styles differ too,
so the chart also reads in greyscale.
"""

from __future__ import annotations

import math
import re
from typing import Any

import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from core.output.escape import html

BLUE = "#0072B2"
ORANGE = "#E69F00"
SKY = "#56B4E9"
VERMILLION = "#D55E00"
PURPLE = "#CC79A7"
GREEN = "#009E73"
INK = "#1F2933"
GRID = "#E4E7EB"
FONT = "Source Sans Pro, Segoe UI, Helvetica, Arial, sans-serif"


def _arrays(curve: dict[str, Any]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Sizes, approximate and exact effects as floats (core sends null for non-finite)."""

    def floats(key: str) -> np.ndarray:
        return np.array([np.nan if v is None else float(v) for v in curve[key]], dtype=float)

    return floats("sizes"), floats("approximate"), floats("exact")


def relative_error(approx: np.ndarray, exact: np.ndarray) -> np.ndarray:
    """|approx - exact| / |exact|; NaN where the exact effect is zero or missing."""
    with np.errstate(divide="ignore", invalid="ignore"):
        rel = np.abs(approx - exact) / np.abs(exact)
    rel[~np.isfinite(rel)] = np.nan
    return rel


def _crossing(x0: float, r0: float, x1: float, r1: float, tol: float) -> float:
    """Where the relative error crosses ``tol`` between two grid points (linear)."""
    if not (math.isfinite(r0) and math.isfinite(r1)) or r0 == r1:
        return (x0 + x1) / 2
    return x0 + (tol - r0) * (x1 - x0) / (r1 - r0)


def tolerance_regions(sizes: np.ndarray, approx: np.ndarray, exact: np.ndarray, tol: float) -> list[tuple[float, float]]:
    """Stretches of change sizes where the approximation is off by more than ``tol``
    (a fraction, 0.1 = 10 %) of the exact effect, with edges interpolated between points."""
    rel = relative_error(approx, exact)
    bad = np.nan_to_num(rel, nan=0.0) > tol
    regions: list[tuple[float, float]] = []
    i, n = 0, len(sizes)
    while i < n:
        if not bad[i]:
            i += 1
            continue
        j = i
        while j + 1 < n and bad[j + 1]:
            j += 1
        left = float(sizes[0]) if i == 0 else _crossing(sizes[i - 1], rel[i - 1], sizes[i], rel[i], tol)
        right = float(sizes[-1]) if j == n - 1 else _crossing(sizes[j], rel[j], sizes[j + 1], rel[j + 1], tol)
        regions.append((float(left), float(right)))
        i = j + 1
    return regions


def safe_range(sizes: np.ndarray, regions: list[tuple[float, float]]) -> tuple[float, float]:
    """The stretch around a zero change where the approximation stays within tolerance."""
    low, high = float(np.min(sizes)), float(np.max(sizes))
    for left, right in regions:
        if right <= 0:
            low = max(low, right)
        elif left >= 0:
            high = min(high, left)
    return low, high


# Plot-area width in pixels assumed when deciding whether a band label fits inside its band.
_PLOT_PIXELS = 850
_CHAR_PIXELS = 7.5


def _band_label(tolerance_pct: float, width_share: float, on_left: bool) -> str:
    """The band's label, shortened when the band is too narrow to hold the full sentence."""
    room = width_share * _PLOT_PIXELS
    words = f"off by > {tolerance_pct:g} % beyond here"
    if room < len(words) * _CHAR_PIXELS:
        words = f"off by > {tolerance_pct:g} %"
    return f"← {words}" if on_left else f"{words} →"


def _fmt(value: float, percent: bool) -> str:
    text = f"{value:+.3g}" if abs(value) >= 0.01 or value == 0 else f"{value:+.2e}"
    text = text.replace("-", "\u2212")
    return f"{text} %" if percent else text


def curve_summary(curve: dict[str, Any], tolerance_pct: float) -> str:
    """Two plain sentences under the chart: the gap at the user's change and where the
    approximation stays within the tolerance."""
    sizes, approx, exact = _arrays(curve)
    percent_change = curve["kind"] == "percent"
    percent_effect = curve["units"] == "percent"
    column = curve["column"]
    chosen = float(curve["chosen"])
    at = int(np.argmin(np.abs(sizes - chosen)))
    rel = relative_error(approx, exact)
    if np.nanmax(np.nan_to_num(rel, nan=0.0)) < 1e-9:
        return (
            f"For this pair of transforms the first-order reading of {column} is exact at every change size, "
            "so the two lines coincide."
        )
    first = (
        f"At your change of {_fmt(chosen, percent_change)} in {column}, the first-order approximation gives "
        f"{_fmt(approx[at], percent_effect)} and the exact effect is {_fmt(exact[at], percent_effect)}"
    )
    if math.isfinite(rel[at]):
        first += f": off by {rel[at] * 100:.3g} % of the exact effect."
    else:
        first += "."
    regions = tolerance_regions(sizes, approx, exact, tolerance_pct / 100)
    low, high = safe_range(sizes, regions)
    unit = " %" if percent_change else ""
    if not regions:
        second = (
            f"Across every change shown ({_fmt(float(sizes.min()), False)}{unit} to {_fmt(float(sizes.max()), False)}{unit}) "
            f"it stays within {tolerance_pct:g} % of the exact effect."
        )
    else:
        second = (
            f"It stays within {tolerance_pct:g} % of the exact effect for changes from "
            f"{_fmt(low, False)}{unit} to {_fmt(high, False)}{unit}; beyond that, use the exact effect."
        )
    return f"{first} {second}"


def effect_subtitle(outcome_column: str, outcome_label: str, percent_effect: bool) -> str:
    """'Effect as % change in weekly_revenue (model of log of weekly_revenue), other regressors
    held at their reference values': the effect is on the outcome itself, whatever its transform."""
    what = f"% change in {outcome_column}" if percent_effect else f"change in {outcome_column} (its own units)"
    model = f" (model of {outcome_label})" if outcome_label != outcome_column else ""
    return f"Effect as {what}{model}, other regressors held at their reference values"


def gap_figure(
    curve: dict[str, Any],
    tolerance_pct: float,
    regressor_label: str,
    outcome_label: str,
    outcome_column: str,
) -> go.Figure:
    """Approximate and exact effect across change sizes, the gap shaded between them, the
    user's change marked, and shaded bands where the approximation misses by more than the
    tolerance. Effects are on the outcome itself (a % change or a change in its units), so the
    subtitle names the outcome, and the model's transform of it only as the model."""
    sizes, approx, exact = _arrays(curve)
    column = html(curve["column"])
    regressor_label, outcome_label, outcome_column = html(regressor_label), html(outcome_label), html(outcome_column)
    percent_change = curve["kind"] == "percent"
    percent_effect = curve["units"] == "percent"
    chosen = float(curve["chosen"])
    x_title = f"Change in {column} (%)" if percent_change else f"Change in {column} (in its own units)"
    y_title = f"Effect on {outcome_column} (%)" if percent_effect else f"Effect on {outcome_column} (in its own units)"
    x_hover = "%{x:.3g} %" if percent_change else "%{x:.4g}"
    y_hover = "%{y:.3g} %" if percent_effect else "%{y:.4g}"

    fig = go.Figure()
    fig.add_trace(
        go.Scatter(
            x=sizes,
            y=exact,
            name="Exact effect",
            mode="lines",
            line={"color": BLUE, "width": 3.5},
            hovertemplate=f"change {x_hover}<br>exact {y_hover}<extra></extra>",
        )
    )
    fig.add_trace(
        go.Scatter(
            x=sizes,
            y=approx,
            name="First-order approximation",
            mode="lines",
            line={"color": ORANGE, "width": 3.5, "dash": "dash"},
            fill="tonexty",
            fillcolor="rgba(86, 180, 233, 0.28)",
            hovertemplate=f"change {x_hover}<br>approximation {y_hover}<extra></extra>",
        )
    )
    # Legend entry for the shaded gap (the fill itself has none of its own).
    fig.add_trace(
        go.Scatter(
            x=[None],
            y=[None],
            mode="markers",
            name="Gap between them",
            marker={"symbol": "square", "size": 16, "color": "rgba(86, 180, 233, 0.45)"},
            hoverinfo="skip",
        )
    )

    regions = tolerance_regions(sizes, approx, exact, tolerance_pct / 100)
    band = f"Approximation off by more than {tolerance_pct:g} %"
    span = float(np.nanmax(sizes) - np.nanmin(sizes)) or 1.0
    for left, right in regions:
        fig.add_vrect(x0=left, x1=right, fillcolor=PURPLE, opacity=0.13, line_width=0, layer="below")
        on_left = right <= 0
        fig.add_annotation(
            x=right if on_left else left,
            xanchor="right" if on_left else "left",
            y=1.0,
            yref="paper",
            yanchor="top",
            text=_band_label(tolerance_pct, (right - left) / span, on_left),
            showarrow=False,
            font={"size": TYPE["note"], "color": "#8A3B6B"},
            bgcolor="rgba(255,255,255,0.8)",
        )
    if regions:
        fig.add_trace(
            go.Scatter(
                x=[None],
                y=[None],
                mode="markers",
                name=band,
                marker={"symbol": "square", "size": 16, "color": "rgba(204, 121, 167, 0.35)"},
                hoverinfo="skip",
            )
        )

    at = int(np.argmin(np.abs(sizes - chosen)))
    fig.add_vline(x=chosen, line={"color": VERMILLION, "width": 2.5, "dash": "dot"})
    # Near the right edge the label goes on the line's left so it is not cut off.
    near_right = chosen > float(np.nanmax(sizes)) - 0.3 * span
    fig.add_annotation(
        x=chosen,
        y=0.0,
        yref="paper",
        yanchor="bottom",
        xanchor="right" if near_right else "left",
        text=f"your change: {_fmt(chosen, percent_change)}",
        showarrow=False,
        font={"size": TYPE["note"], "color": VERMILLION},
        bgcolor="rgba(255,255,255,0.85)",
        xshift=-6 if near_right else 6,
    )
    fig.add_trace(
        go.Scatter(
            x=[sizes[at], sizes[at]],
            y=[exact[at], approx[at]],
            mode="markers",
            marker={"color": [BLUE, ORANGE], "size": 11, "line": {"color": "white", "width": 1.5}},
            showlegend=False,
            hovertemplate=f"your change {x_hover}<br>{y_hover}<extra></extra>",
        )
    )
    fig.add_hline(y=0, line={"color": "#9AA5B1", "width": 1})

    _style(
        fig,
        f"How far the shortcut drifts: changing {regressor_label}",
        effect_subtitle(outcome_column, outcome_label, percent_effect),
        x_title,
        y_title,
        height=580,
    )
    fig.update_layout(
        xaxis={
            "range": [float(np.nanmin(sizes)) - 0.02 * span, float(np.nanmax(sizes)) + 0.02 * span],
            "ticksuffix": " %" if percent_change else "",
        },
        yaxis={"ticksuffix": " %" if percent_effect else ""},
    )
    return fig


# --- shared look of the views' charts ------------------------------------------------------------------
GREY = "#7B8794"
BEYOND_NAME = "Beyond the data: extrapolated"
SHADE = "#9AA5B1"
SUBTLE = "#52606D"
CONFIG = {"displaylogo": False}
# Type sizes in CSS pixels of the figure's own canvas. The canvas of a full-slide export is
# 1280 x 720 px, which at 96 px per inch is the 13.33 x 7.5 in of a 16:9 slide: a size here
# times 0.75 is the size in points on the slide (ticks 14 pt, title 19.5 pt), the same figure
# on screen reads like a preview of the slide.
TYPE = {"base": 19, "title": 26, "subtitle": 18, "legend": 18, "note": 17, "caption": 16}
# Room per row of the legend placed between the subtitle and the plot.
_LEGEND_ROW = 32
# Widest line of title, subtitle, legend or caption: the chart's width less the margins, and
# never more than fits the chart on a laptop screen.
_SCREEN_TEXT_WIDTH = 980
_SIDE_MARGINS = 120
# Bottom margin under the plot: the tick labels and a one-line x-axis title.
_BOTTOM = 84


def _floats(values: list[Any] | None) -> np.ndarray:
    return np.array([np.nan if v is None else float(v) for v in values or []], dtype=float)


def wrap(text: str, limit: int) -> tuple[str, int]:
    """Text broken at spaces into lines of at most ``limit`` characters (Plotly does not wrap
    titles itself), joined with <br>; and the number of lines."""
    lines: list[str] = []
    for word in text.split(" "):
        if lines and len(lines[-1]) + 1 + len(word) <= limit:
            lines[-1] += " " + word
        else:
            lines.append(word)
    return "<br>".join(lines), max(1, len(lines))


def text_width(canvas_width: int | None = None) -> int:
    """Pixels a line of text may take on a canvas ``canvas_width`` wide (the full slide when
    not given), capped so the same line fits the chart on screen."""
    width = canvas_width or SLIDE_SIZES["full"][1]
    return min(width - _SIDE_MARGINS, _SCREEN_TEXT_WIDTH)


def _chars_per_line(size: float, canvas_width: int | None = None) -> int:
    """Characters of a ``size``-pixel font that fit one line (about 0.52 em per character)."""
    return int(text_width(canvas_width) / (0.52 * size))


def legend_rows(fig: go.Figure, canvas_width: int | None = None) -> int:
    """How many rows the horizontal legend takes on the canvas. Each entry is about half an em
    per character plus its symbol; entries that do not fit on one row are set by Plotly in a
    grid of columns as wide as the widest entry (seen in rendered exports)."""
    names = [t.name for t in fig.data if t.name and t.showlegend is not False]
    if not names:
        return 0
    room = text_width(canvas_width)
    widths = [len(name) * 0.52 * TYPE["legend"] + 50 for name in names]
    if sum(widths) <= room:
        return 1
    columns = max(1, int(room // max(widths)))
    return math.ceil(len(names) / columns)


def _top_margin(fig: go.Figure, canvas_width: int | None = None) -> tuple[str, str, int, int]:
    """Title and subtitle wrapped for the canvas, the title's padding from the top edge, and
    the top margin that holds title, subtitle and legend. The unwrapped texts are kept in the
    figure's ``meta`` by ``_style``."""
    meta = fig.layout.meta or {}
    size = meta.get("title_size") or TYPE["title"]
    title, title_lines = wrap(meta.get("title", ""), _chars_per_line(size, canvas_width))
    subtitle, subtitle_lines = wrap(meta.get("subtitle", ""), _chars_per_line(TYPE["subtitle"], canvas_width))
    rows = legend_rows(fig, canvas_width) if meta.get("legend", True) else 0
    line = round(1.3 * size)
    top = 18 + line * title_lines + round(1.35 * TYPE["subtitle"]) * subtitle_lines + 26
    return title, subtitle, top + _LEGEND_ROW * rows, title_pad(size, title_lines)


def title_pad(size: int, lines: int) -> int:
    """Padding above a title anchored at the figure's top edge. Plotly lifts a title of more
    than one line by about 0.7 em (measured in rendered PNGs for 2 to 4 lines at 22 and 30 px),
    which cuts the first line off; the extra padding puts it back."""
    return 18 + (round(0.7 * size) if lines > 1 else 0)


def _style(
    fig: go.Figure,
    title: str,
    subtitle: str,
    x_title: str,
    y_title: str,
    height: int = 520,
    legend: bool = True,
    title_size: int | None = None,
) -> go.Figure:
    """The look every chart shares, on screen and exported at any slide size: white, large
    type, a plain-word title and subtitle pinned to the top edge, the legend between them and
    the plot (pinned to the plot's top edge, so it never drifts when the export is taller or
    wider than the screen), and the axis titles naming the variables and their transforms.
    Call it after the traces are added (the legend's height depends on them)."""
    size = title_size or TYPE["title"]
    fig.update_layout(meta={"title": title, "subtitle": subtitle, "title_size": size, "legend": legend, "x_title": x_title})
    title, subtitle, top, title_pad = _top_margin(fig)
    fig.update_layout(
        template="plotly_white",
        paper_bgcolor="white",
        plot_bgcolor="white",
        font={"family": FONT, "size": TYPE["base"], "color": INK},
        title={
            "text": title,
            "subtitle": {"text": subtitle, "font": {"size": TYPE["subtitle"], "color": SUBTLE}},
            "x": 0.01,
            "xanchor": "left",
            "xref": "container",
            "y": 1.0,
            "yanchor": "top",
            "yref": "container",
            "pad": {"t": title_pad},
            "font": {"size": size},
        },
        xaxis={"title": {"text": x_title}, "gridcolor": GRID, "zeroline": False},
        yaxis={"title": {"text": y_title}, "gridcolor": GRID, "zeroline": False},
        showlegend=legend,
        legend={
            "orientation": "h",
            "yref": "paper",
            "yanchor": "bottom",
            "y": 1.0,
            "x": 0.0,
            "xanchor": "left",
            "font": {"size": TYPE["legend"]},
            "traceorder": "normal",
            "entrywidth": 0,
        },
        margin={"l": 90, "r": 30, "t": top, "b": _BOTTOM},
        height=height,
        hovermode="closest",
    )
    return fig


# --- export at slide size -----------------------------------------------------------------------
# name: (words, width, height) of the figure's canvas in CSS pixels. A 16:9 slide is 13.33 x 7.5 in,
# 1280 x 720 px at 96 px per inch, so an SVG drops onto a slide at its real size and the type
# keeps its point sizes (see TYPE). PNGs are drawn at EXPORT_SCALE times the canvas: a full
# slide's PNG is 3840 x 2160, twice the pixels of a 1920 x 1080 screen, sharp on a 4K projector.
SLIDE_SIZES = {
    "full": ("Full slide, 16:9", 1280, 720),
    "half": ("Half slide, 8:9", 640, 720),
    "square": ("Square", 720, 720),
}
EXPORT_FORMATS = {"png": "PNG (picture)", "svg": "SVG (scalable, editable)"}
EXPORT_SCALE = 3
# Distance of the caption line under the plot: clear of the tick labels and the x-axis title.
_CAPTION_GAP = {True: 84, False: 44}


def size_label(size: str) -> str:
    """'Full slide, 16:9 (PNG 3840 × 2160)': the words and the pixels of the PNG."""
    words, width, height = SLIDE_SIZES[size]
    return f"{words} (PNG {width * EXPORT_SCALE} × {height * EXPORT_SCALE})"


def file_stem(text: str, limit: int = 80) -> str:
    """A safe file name part from any text: letters, digits, '-', '_' and '.' only."""
    stem = re.sub(r"[^A-Za-z0-9._-]+", "_", str(text)).strip("._-")
    return stem[:limit] or "chart"


def export_config(size: str = "full", fmt: str = "png", filename: str = "formwise-chart") -> dict[str, Any]:
    """Plotly's config for a chart: the toolbar's download button draws the chart on the slide
    canvas (``SLIDE_SIZES``), in PNG at ``EXPORT_SCALE`` times its pixels, or in SVG."""
    _, width, height = SLIDE_SIZES[size]
    return {
        "displaylogo": False,
        "modeBarButtonsToRemove": ["lasso2d", "select2d"],
        "toImageButtonOptions": {
            "format": fmt,
            "filename": file_stem(filename),
            "width": width,
            "height": height,
            "scale": EXPORT_SCALE,
        },
    }


def caption_text(data_name: str, n_obs: int | None, spec_name: str | None) -> str:
    """'Data: kiosks.csv · N = 1,500 · Model: log of weekly_revenue explained by …'."""
    parts = [f"Data: {data_name}"]
    if n_obs is not None:
        parts.append(f"N = {n_obs:,}")
    if spec_name:
        parts.append(f"Model: {spec_name}")
    return " · ".join(parts)


def for_slide(fig: go.Figure, size: str = "full", caption: str | None = None, screen_width: int | None = None) -> go.Figure:
    """The figure laid out for the slide canvas it will be downloaded at: title, subtitle,
    legend and x-axis title wrapped to that width (or to ``screen_width``, the width of the
    column that shows it, when narrower), and the source line (data file, N, model) under the
    plot when given. Changes the figure it is given and returns it: figures are built afresh
    on each rerun, and copying one of 20,000 points would cost more than drawing it."""
    canvas_width = SLIDE_SIZES[size][1]
    if screen_width:
        canvas_width = min(canvas_width, screen_width)
    out = fig
    if out.layout.meta:
        title, subtitle, top, title_pad = _top_margin(out, canvas_width)
        out.update_layout(title_text=title, title_subtitle_text=subtitle, title_pad_t=title_pad, margin_t=top)
        x_title, x_lines = wrap(out.layout.meta.get("x_title") or "", _chars_per_line(TYPE["base"], canvas_width))
        out.update_layout(xaxis_title_text=x_title, margin_b=_BOTTOM + round(1.3 * TYPE["base"]) * (x_lines - 1))
    return with_caption(out, caption, canvas_width)


def with_caption(fig: go.Figure, caption: str | None, canvas_width: int | None = None) -> go.Figure:
    """The figure with a source line (data file, N, model) under the plot, or unchanged
    without one. Changes the figure it is given (see ``for_slide``)."""
    if not caption:
        return fig
    out = fig
    x_title = out.layout.xaxis.title.text or ""
    x_extra = round(1.3 * TYPE["base"]) * x_title.count("<br>")
    bottom = out.layout.margin.b if out.layout.margin.b is not None else 84
    text, lines = wrap(html(caption), _chars_per_line(TYPE["caption"], canvas_width))
    out.add_annotation(
        text=text,
        xref="paper",
        x=0.0,
        xanchor="left",
        yref="paper",
        y=0.0,
        yanchor="top",
        yshift=-_CAPTION_GAP[bool(x_title)] - x_extra,
        showarrow=False,
        align="left",
        font={"size": TYPE["caption"], "color": SUBTLE},
        name="caption",
    )
    out.update_layout(margin={"b": bottom + 8 + round(1.4 * TYPE["caption"]) * lines})
    return out


def _legend_dot(fig: go.Figure, name: str, colour: str, size: int = 8) -> None:
    """A legend entry for faint dots, drawn at full strength so it can be seen."""
    fig.add_trace(
        go.Scatter(x=[None], y=[None], mode="markers", name=name, marker={"color": colour, "size": size}, hoverinfo="skip")
    )


def point_count(fig: go.Figure) -> int:
    """Data points a figure sends to the browser (for the 20,000-point budget)."""
    total = 0
    for trace in fig.data:
        for axis in ("x", "y"):
            values = getattr(trace, axis, None)
            if values is not None:
                total += len(values)
                break
    return total


# --- effect curves ---------------------------------------------------------------------------------------
SMEARING_NAME = "Smearing (Duan) — expected value"
NAIVE_NAME = "Naive back-transform — closer to the median"


def _model_words(outcome_label: str, ppml: bool) -> str:
    return f"PPML model of the mean of {outcome_label}" if ppml else f"Model of {outcome_label}"


def _y_range(curves: list[np.ndarray], points: np.ndarray) -> tuple[float, float]:
    """Room for every curve and band, and for the data points up to their 1st and 99th
    percentiles, so a few extreme rows do not flatten the curve."""
    values = [c[np.isfinite(c)] for c in curves]
    finite = np.concatenate([v for v in values if v.size] or [np.array([0.0])])
    low, high = float(finite.min()), float(finite.max())
    pts = points[np.isfinite(points)] if points.size else points
    if pts.size:
        low = min(low, float(np.percentile(pts, 1)))
        high = max(high, float(np.percentile(pts, 99)))
    pad = 0.05 * ((high - low) or abs(high) or 1.0)
    return low - pad, high + pad


def curve_figure(
    curve: dict[str, Any],
    *,
    regressor_label: str,
    outcome_column: str,
    outcome_label: str,
    points: dict[str, Any] | None = None,
    show_naive: bool = True,
    overlay: dict[str, Any] | None = None,
    overlay_label: str | None = None,
    ppml: bool = False,
) -> go.Figure:
    """The predicted outcome on its original scale across one regressor's range (others at the
    reference point): the CI band, the smearing and the naive retransform, a light sample of the
    data, the stretches beyond the observed data shaded, and optionally the smearing curve of
    another transform of the same regressor."""
    regressor_label, outcome_column, outcome_label = html(regressor_label), html(outcome_column), html(outcome_label)
    if curve["kind"] == "levels":
        return _levels_figure(curve, regressor_label, outcome_column, outcome_label, points, show_naive, ppml)
    column = html(curve["column"])
    x = _floats(curve["x"])
    smear, naive = _floats(curve["smearing"]), _floats(curve["naive"])
    low, high = _floats(curve["ci_low"]), _floats(curve["ci_high"])
    observed_min, observed_max = float(curve["observed_min"]), float(curve["observed_max"])
    # A variable that is never negative is not drawn below zero, even where its transform allows it.
    keep = x >= 0 if observed_min >= 0 else np.ones_like(x, dtype=bool)
    x, smear, naive, low, high = (a[keep] for a in (x, smear, naive, low, high))

    fig = go.Figure()
    pts_y = np.array([], dtype=float)
    if points and points.get("x"):
        pts_y = _floats(points["y"])
        fig.add_trace(
            go.Scatter(
                x=points["x"],
                y=points["y"],
                mode="markers",
                showlegend=False,
                marker={"color": GREY, "size": 5, "opacity": 0.28},
                hovertemplate=f"{column} %{{x:.4g}}<br>{outcome_column} %{{y:.4g}}<extra>data</extra>",
            )
        )
        _legend_dot(fig, "Data rows" + (" (a sample)" if points["shown"] < points["total"] else ""), GREY)
    fig.add_trace(go.Scatter(x=x, y=high, mode="lines", line={"width": 0}, showlegend=False, hoverinfo="skip"))
    fig.add_trace(
        go.Scatter(
            x=x,
            y=low,
            mode="lines",
            line={"width": 0},
            fill="tonexty",
            fillcolor="rgba(86, 180, 233, 0.30)",
            name="95 % confidence band",
            hoverinfo="skip",
        )
    )
    if ppml:
        main_name = "Predicted mean (PPML models it directly)"
    elif show_naive:
        main_name = SMEARING_NAME
    else:
        main_name = f"Predicted {outcome_column} (expected value)"
    fig.add_trace(
        go.Scatter(
            x=x,
            y=smear,
            mode="lines",
            name=main_name,
            line={"color": BLUE, "width": 3.5},
            hovertemplate=f"{column} %{{x:.4g}}<br>expected {outcome_column} %{{y:,.4g}}<extra></extra>",
        )
    )
    curves = [smear, low, high]
    if show_naive:
        fig.add_trace(
            go.Scatter(
                x=x,
                y=naive,
                mode="lines",
                name=NAIVE_NAME,
                line={"color": ORANGE, "width": 3, "dash": "dash"},
                hovertemplate=f"{column} %{{x:.4g}}<br>naive %{{y:,.4g}}<extra></extra>",
            )
        )
        curves.append(naive)
    if overlay is not None:
        ox = _floats(overlay["x"])
        oy = _floats(overlay["smearing"])
        okeep = ox >= 0 if observed_min >= 0 else np.ones_like(ox, dtype=bool)
        fig.add_trace(
            go.Scatter(
                x=ox[okeep],
                y=oy[okeep],
                mode="lines",
                name=html(overlay_label or "Other transform"),
                line={"color": VERMILLION, "width": 3, "dash": "dashdot"},
                hovertemplate=f"{column} %{{x:.4g}}<br>%{{y:,.4g}}<extra>other transform</extra>",
            )
        )
        curves.append(oy[okeep])

    x_low, x_high = float(np.nanmin(x)), float(np.nanmax(x))
    shaded = False
    for left, right in ((x_low, observed_min), (observed_max, x_high)):
        if right - left <= 1e-12 * max(1.0, abs(right)):
            continue
        fig.add_vrect(x0=left, x1=right, fillcolor=SHADE, opacity=0.16, line_width=0, layer="below")
        shaded = True
    if shaded:
        # Named in the legend rather than written in the strips: a strip can be too narrow
        # for a label on a half-slide export.
        fig.add_trace(
            go.Scatter(
                x=[None],
                y=[None],
                mode="markers",
                name=BEYOND_NAME,
                marker={"symbol": "square", "size": 16, "color": "rgba(154, 165, 177, 0.35)"},
                hoverinfo="skip",
            )
        )

    y_low, y_high = _y_range(curves, pts_y)
    _style(
        fig,
        title=f"Predicted {outcome_column} as {column} varies",
        subtitle=f"{_model_words(outcome_label, ppml)} on {regressor_label} and other regressors, these held at their reference values",
        x_title=f"{column} (as recorded)",
        y_title=f"{outcome_column} (original units)",
        height=660,
    )
    fig.update_layout(
        xaxis={"range": [x_low - 0.01 * (x_high - x_low), x_high + 0.01 * (x_high - x_low)]},
        yaxis={"range": [y_low, y_high]},
    )
    return fig


def _levels_figure(
    curve: dict[str, Any],
    regressor_label: str,
    outcome_column: str,
    outcome_label: str,
    points: dict[str, Any] | None,
    show_naive: bool,
    ppml: bool,
) -> go.Figure:
    """Categories and 0/1 variables: one point per level with its 95 % interval as error bars,
    the data as a light jittered strip behind."""
    column = html(curve["column"])
    levels = [str(v) if not isinstance(v, float) else f"{v:g}" for v in curve["x"]]
    ticks = [html(f"{lv} (reference)" if i == 0 and len(levels) > 2 else lv) for i, lv in enumerate(levels)]
    positions = np.arange(len(levels), dtype=float)
    smear, naive = _floats(curve["smearing"]), _floats(curve["naive"])
    low, high = _floats(curve["ci_low"]), _floats(curve["ci_high"])
    fig = go.Figure()
    pts_y = np.array([], dtype=float)
    if points and points.get("x"):
        labels = [str(v) if not isinstance(v, float) else f"{v:g}" for v in points["x"]]
        where = {lv: i for i, lv in enumerate(levels)}
        pairs = [(where[lv], y) for lv, y in zip(labels, points["y"], strict=True) if lv in where]
        if pairs:
            jitter = np.random.default_rng(0).uniform(-0.28, 0.28, len(pairs))
            px = np.array([p for p, _ in pairs], dtype=float) + jitter
            pts_y = np.array([y for _, y in pairs], dtype=float)
            fig.add_trace(
                go.Scatter(
                    x=px,
                    y=pts_y,
                    mode="markers",
                    showlegend=False,
                    marker={"color": GREY, "size": 5, "opacity": 0.25},
                    hovertemplate=f"{outcome_column} %{{y:.4g}}<extra>data</extra>",
                )
            )
            _legend_dot(fig, "Data rows" + (" (a sample)" if points["shown"] < points["total"] else ""), GREY)
    main_name = (
        "Predicted mean (PPML)" if ppml else (SMEARING_NAME if show_naive else f"Predicted {outcome_column} (expected value)")
    )
    offset = 0.1 if show_naive else 0.0
    fig.add_trace(
        go.Scatter(
            x=positions - offset,
            y=smear,
            mode="markers",
            name=main_name + " with 95 % interval",
            marker={"color": BLUE, "size": 15, "line": {"color": "white", "width": 1.5}},
            error_y={
                "type": "data",
                "symmetric": False,
                "array": high - smear,
                "arrayminus": smear - low,
                "color": BLUE,
                "thickness": 3,
                "width": 10,
            },
            hovertemplate="%{y:,.4g}<extra>expected value</extra>",
        )
    )
    curves = [smear, low, high]
    if show_naive:
        fig.add_trace(
            go.Scatter(
                x=positions + offset,
                y=naive,
                mode="markers",
                name=NAIVE_NAME,
                marker={"color": ORANGE, "size": 14, "symbol": "diamond", "line": {"color": "white", "width": 1.5}},
                hovertemplate="%{y:,.4g}<extra>naive</extra>",
            )
        )
        curves.append(naive)
    y_low, y_high = _y_range(curves, pts_y)
    _style(
        fig,
        title=f"Predicted {outcome_column} by {column}",
        subtitle=f"{_model_words(outcome_label, ppml)} on {regressor_label} and other regressors, these held at their reference values",
        x_title=column,
        y_title=f"{outcome_column} (original units)",
        height=640,
    )
    fig.update_layout(
        xaxis={"tickmode": "array", "tickvals": positions.tolist(), "ticktext": ticks, "range": [-0.6, len(levels) - 0.4]},
        yaxis={"range": [y_low, y_high]},
    )
    return fig


# --- units check ----------------------------------------------------------------------------------------
def units_figure(check: dict[str, Any], outcome_column: str, tick_words: list[str]) -> go.Figure:
    """The exact effect of the same real change when the variable is recorded in other units."""
    rows = check["rows"]
    column, outcome_column = html(check["column"]), html(outcome_column)
    factors = [r["factor"] for r in rows]
    exact = _floats([r["exact"] for r in rows])
    percent = check["units"] == "percent"
    colours = [VERMILLION if math.isclose(f, 1.0) else BLUE for f in factors]
    sizes = [15 if math.isclose(f, 1.0) else 11 for f in factors]
    fig = go.Figure(
        go.Scatter(
            x=factors,
            y=exact,
            mode="lines+markers",
            line={"color": BLUE, "width": 3},
            marker={"color": colours, "size": sizes, "line": {"color": "white", "width": 1.5}},
            hovertemplate="%{text}<br>effect %{y:.3g}" + (" %" if percent else "") + "<extra></extra>",
            text=tick_words,
            showlegend=False,
        )
    )
    for factor, value in zip(factors, exact, strict=True):
        if math.isclose(factor, 1.0) and math.isfinite(value):
            fig.add_annotation(
                x=0.0,
                xref="x",
                y=value,
                text="units in the data",
                showarrow=True,
                arrowhead=0,
                ax=0,
                ay=34,
                font={"size": TYPE["note"], "color": VERMILLION},
                bgcolor="rgba(255,255,255,0.85)",
            )
    y_title = f"% change in {outcome_column}" if percent else f"change in {outcome_column}"
    _style(
        fig,
        title=f"Effect of {html(check['change'])} in {column}, by units",
        subtitle="A flat line would mean the units do not matter",
        x_title=f"{column} rescaled",
        y_title=y_title,
        height=440,
        legend=False,
        title_size=22,
    )
    fig.update_layout(
        xaxis={"type": "log", "tickmode": "array", "tickvals": factors, "ticktext": tick_words, "tickangle": 0},
        yaxis={"ticksuffix": " %" if percent else "", "rangemode": "tozero"},
    )
    return fig


# --- residual checks ----------------------------------------------------------------------------------------
def _dot_opacity(n: int) -> float:
    return 0.6 if n <= 2_000 else 0.35 if n <= 8_000 else 0.2


def _dots_with_trend(
    x: Any, y: Any, shown: int, trend: dict[str, Any], trend_name: str, hover: str, zero_line: bool
) -> go.Figure:
    """Rows as faint dots with a moving-average line: the shape of both residual scatter charts."""
    fig = go.Figure()
    fig.add_trace(
        go.Scatter(
            x=x,
            y=y,
            mode="markers",
            name="Rows",
            marker={"color": BLUE, "size": 5, "opacity": _dot_opacity(shown)},
            hovertemplate=hover,
        )
    )
    fig.add_trace(
        go.Scatter(
            x=trend["x"], y=trend["y"], mode="lines", name=trend_name, line={"color": VERMILLION, "width": 3}, hoverinfo="skip"
        )
    )
    if zero_line:
        fig.add_hline(y=0, line={"color": INK, "width": 1.2})
    return fig


def residuals_figure(data: dict[str, Any], fitted_label: str) -> go.Figure:
    fig = _dots_with_trend(
        data["fitted"], data["resid"], data["shown"], data["trend"], "Average residual",
        "fitted %{x:.4g}<br>residual %{y:.3g}<extra></extra>", zero_line=True,
    )  # fmt: skip
    return _style(
        fig,
        "Residuals against fitted values",
        "Good: an even cloud around zero, flat red line",
        f"Fitted {html(fitted_label)}",
        "Residual",
        height=470,
        title_size=22,
    )


def qq_figure(data: dict[str, Any]) -> go.Figure:
    theory = _floats(data["qq_theory"])
    sample = _floats(data["qq_sample"])
    edge = float(np.nanmax(np.abs(np.concatenate([theory, sample])))) if theory.size else 3.0
    fig = go.Figure()
    fig.add_trace(
        go.Scatter(
            x=[-edge, edge],
            y=[-edge, edge],
            mode="lines",
            name="Normal residuals would lie here",
            line={"color": ORANGE, "width": 3, "dash": "dash"},
            hoverinfo="skip",
        )
    )
    fig.add_trace(
        go.Scatter(
            x=theory,
            y=sample,
            mode="markers",
            name="Residuals, in order",
            marker={"color": BLUE, "size": 5, "opacity": _dot_opacity(len(theory))},
            hovertemplate="normal %{x:.3g}<br>residual %{y:.3g}<extra></extra>",
        )
    )
    return _style(
        fig,
        "Residuals against a normal curve (Q–Q)",
        "Good: points along the dashed line",
        "Where a normal curve puts them (standard units)",
        "Standardised residual",
        height=470,
        title_size=22,
    )


def residual_histogram(data: dict[str, Any]) -> go.Figure:
    counts = np.array(data["hist_counts"], dtype=float)
    edges = np.array(data["hist_edges"], dtype=float)
    centres = (edges[:-1] + edges[1:]) / 2
    width = float(edges[1] - edges[0]) if len(edges) > 1 else 1.0
    sigma = float(data["sigma"]) or 1.0
    grid = np.linspace(edges[0], edges[-1], 120)
    density = data["n"] * width * np.exp(-0.5 * (grid / sigma) ** 2) / (sigma * np.sqrt(2 * np.pi))
    fig = go.Figure()
    fig.add_trace(
        go.Bar(
            x=centres,
            y=counts,
            width=width * 0.96,
            name="Residuals",
            marker={"color": SKY, "line": {"width": 0}},
            hovertemplate="residual %{x:.3g}<br>%{y:,} rows<extra></extra>",
        )
    )
    fig.add_trace(
        go.Scatter(
            x=grid,
            y=density,
            mode="lines",
            name="Normal curve, same spread",
            line={"color": ORANGE, "width": 3},
            hoverinfo="skip",
        )
    )
    return _style(
        fig,
        "How the residuals are spread",
        f"Every one of the {data['n']:,} rows counted",
        "Residual",
        "Rows",
        height=470,
        title_size=22,
    )


def scale_location_figure(data: dict[str, Any], fitted_label: str) -> go.Figure:
    fig = _dots_with_trend(
        data["fitted"], data["root_abs"], data["shown"], data["spread_trend"], "Average",
        "fitted %{x:.4g}<br>%{y:.3g}<extra></extra>", zero_line=False,
    )  # fmt: skip
    return _style(
        fig,
        "Spread of residuals against fitted values",
        "Good: a flat red line; rising or falling means the spread changes",
        f"Fitted {html(fitted_label)}",
        "√|standardised residual|",
        height=470,
        title_size=22,
    )


def distribution_figure(item: dict[str, Any]) -> go.Figure:
    """One variable's histogram as recorded and, beside it, as transformed."""
    panels = [("raw", f"As recorded<br>skewness {_skew_text(item['skew_raw'])}")]
    if item.get("transformed"):
        panels.append(("transformed", f"As {html(item['label'])}<br>skewness {_skew_text(item['skew_transformed'])}"))
    fig = make_subplots(rows=1, cols=len(panels), subplot_titles=[t for _, t in panels], horizontal_spacing=0.1)
    for i, (key, _) in enumerate(panels, start=1):
        hist = item[key]
        edges = np.array(hist["edges"], dtype=float)
        centres = (edges[:-1] + edges[1:]) / 2
        fig.add_trace(
            go.Bar(
                x=centres,
                y=hist["counts"],
                width=float(edges[1] - edges[0]) * 0.96,
                marker={"color": SKY if key == "raw" else BLUE, "line": {"width": 0}},
                showlegend=False,
                hovertemplate="%{x:.4g}<br>%{y:,} rows<extra></extra>",
            ),
            row=1,
            col=i,
        )
    fig.update_layout(
        template="plotly_white",
        paper_bgcolor="white",
        plot_bgcolor="white",
        font={"family": FONT, "size": TYPE["base"] - 1, "color": INK},
        title={
            "text": f"{html(item['column'])} ({item['role']})",
            "x": 0.01,
            "xanchor": "left",
            "xref": "container",
            "y": 1.0,
            "yanchor": "top",
            "yref": "container",
            "pad": {"t": 18},
            "font": {"size": 22},
        },
        margin={"l": 70, "r": 20, "t": 124, "b": 48},
        height=360,
        bargap=0.02,
    )
    fig.update_annotations(font={"size": TYPE["note"], "color": SUBTLE})
    fig.update_xaxes(gridcolor=GRID, zeroline=False)
    fig.update_yaxes(gridcolor=GRID, zeroline=False, title_text="Rows", row=1, col=1)
    return fig


def profile_histogram_figure(entry: dict[str, Any]) -> go.Figure | None:
    """A column's histogram as recorded (from its profile), with its skewness and row count:
    the evidence beside the advisor's suggestion."""
    histogram = entry.get("histogram")
    if not histogram:
        return None
    edges = np.asarray(histogram["edges"], dtype=float)
    counts = np.asarray(histogram["counts"], dtype=float)
    column = html(entry["column"])
    fig = go.Figure(
        go.Bar(
            x=(edges[:-1] + edges[1:]) / 2,
            y=counts,
            width=np.diff(edges),
            marker={"color": SKY, "line": {"color": "white", "width": 1}},
            hovertemplate="%{x:.4g}: %{y:,} rows<extra></extra>",
            showlegend=False,
        )
    )
    n = entry.get("n")
    subtitle = f"Skewness {_skew_text(entry.get('skewness'))}" + (f" · {int(n):,} values" if n is not None else "")
    _style(fig, f"{column} as recorded", subtitle, column, "Rows", height=420, legend=False)
    fig.update_layout(bargap=0)
    return fig


def _skew_text(value: float | None) -> str:
    return "n/a" if value is None else f"{value:.2f}".replace("-", "\u2212")


def boxcox_figure(boxcox: dict[str, Any], outcome_column: str) -> go.Figure:
    """The profile log-likelihood of the Box-Cox power λ, with λ̂, its 95 % interval and the
    two powers people usually choose between: 0 (log) and 1 (level)."""
    outcome_column = html(outcome_column)
    lam = _floats(boxcox["profile"]["lambda"])
    loglik = _floats(boxcox["profile"]["loglik"])
    best, low, high = boxcox["lambda"], boxcox.get("ci_low"), boxcox.get("ci_high")
    fig = go.Figure()
    if low is not None and high is not None:
        fig.add_vrect(x0=low, x1=high, fillcolor=SKY, opacity=0.3, line_width=0, layer="below")
        fig.add_trace(
            go.Scatter(
                x=[None],
                y=[None],
                mode="markers",
                name=f"95 % interval: {_skew_text(low)} to {_skew_text(high)}",
                marker={"symbol": "square", "size": 16, "color": "rgba(86, 180, 233, 0.45)"},
                hoverinfo="skip",
            )
        )
    fig.add_trace(
        go.Scatter(
            x=lam,
            y=loglik,
            mode="lines",
            name="Profile log-likelihood",
            line={"color": BLUE, "width": 3.5},
            hovertemplate="λ %{x:.2f}<br>log-likelihood %{y:,.1f}<extra></extra>",
        )
    )
    fig.add_trace(
        go.Scatter(
            x=[best],
            y=[boxcox.get("loglik_max")],
            mode="markers",
            name=f"Best power λ̂ = {_skew_text(best)}",
            marker={"color": VERMILLION, "size": 14, "line": {"color": "white", "width": 1.5}},
            hovertemplate="λ̂ %{x:.3f}<extra></extra>",
        )
    )
    for value, word in ((0.0, "λ = 0: log"), (1.0, "λ = 1: level")):
        fig.add_vline(x=value, line={"color": INK, "width": 1.5, "dash": "dot"})
        fig.add_annotation(
            x=value,
            y=0.02,
            yref="paper",
            yanchor="bottom",
            xanchor="left",
            xshift=5,
            text=word,
            showarrow=False,
            font={"size": TYPE["note"], "color": INK},
            bgcolor="rgba(255,255,255,0.85)",
        )
    return _style(
        fig,
        f"Which power of {outcome_column} fits best (Box-Cox)",
        f"Higher is better; {outcome_column} is modelled on the regressors as they are transformed now",
        "Power λ of the outcome (0 = log, 0.5 ≈ square root, 1 = level)",
        "Profile log-likelihood",
        height=520,
    )
