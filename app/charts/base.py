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

from core.output.escape import html
from core.output.theme import (  # noqa: F401 - the app's charts read the shared look from here
    BEYOND_NAME,
    BLUE,
    FONT,
    GREEN,
    GREY,
    GRID,
    INK,
    ORANGE,
    PURPLE,
    SHADE,
    SKY,
    SLIDE_SIZES,
    SUBTLE,
    TYPE,
    VERMILLION,
)

# --- shared look of the views' charts ------------------------------------------------------------------
CONFIG = {"displaylogo": False}
# Type sizes in CSS pixels of the figure's own canvas. The canvas of a full-slide export is
# 1280 x 720 px, which at 96 px per inch is the 13.33 x 7.5 in of a 16:9 slide: a size here
# times 0.75 is the size in points on the slide (ticks 14 pt, title 19.5 pt), the same figure
# on screen reads like a preview of the slide.
# Room per row of the legend placed between the subtitle and the plot.
_LEGEND_ROW = 32
# Widest line of title, subtitle, legend or caption: the chart's width less the margins, and
# never more than fits the chart on a laptop screen.
_SCREEN_TEXT_WIDTH = 980
_SIDE_MARGINS = 120
# Bottom margin under the plot: the tick labels and a one-line x-axis title.
_BOTTOM = 84


def floats(values: list[Any] | None) -> np.ndarray:
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


def style(
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


def legend_dot(fig: go.Figure, name: str, colour: str, size: int = 8) -> None:
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
