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

from app.charts.look import TEMPLATE, text_px, wrap, wrap_px  # noqa: F401 - re-exported for the views' charts
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
# Type sizes in CSS pixels of the figure's own canvas. The canvas of a full-slide export is
# 1280 x 720 px, which at 96 px per inch is the 13.33 x 7.5 in of a 16:9 slide: a size here
# times 0.75 is the size in points on the slide (ticks 14 pt, title 19.5 pt), the same figure
# on screen reads like a preview of the slide.
# The legend between the subtitle and the plot, as plotly.js 3 sets it (components/legend):
# each entry is a line of 1.3 em plus 3 px, the legend has 5 px of room above and below, and an
# entry's symbol with its gaps takes 40 px (50 here, with some slack for the text's estimate).
_LEGEND_LINE = 1.3 * TYPE["legend"]
_LEGEND_PAD = 10
_LEGEND_SYMBOL = 50
# Room between the subtitle's last line and the legend (or the plot, without a legend).
_HEADER_GAP = 16
# Widest line of title, subtitle, legend or caption: the chart's width less the margins, and
# never more than fits a chart across the main column of a 1280 px window (820 px, measured
# in Chromium with the sidebar open).
_SCREEN_TEXT_WIDTH = 700
_SIDE_MARGINS = 120
# Bottom margin under the plot: the tick labels and a one-line x-axis title.
_BOTTOM = 84


def floats(values: list[Any] | None) -> np.ndarray:
    return np.array([np.nan if v is None else float(v) for v in values or []], dtype=float)


def text_width(canvas_width: int | None = None) -> int:
    """Pixels a line of text may take on a canvas ``canvas_width`` wide (the full slide when
    not given), capped so the same line fits the chart on screen."""
    width = canvas_width or SLIDE_SIZES["full"][1]
    return min(width - _SIDE_MARGINS, _SCREEN_TEXT_WIDTH)


def _legend_names(fig: go.Figure) -> list[tuple[int, str]]:
    """(trace index, unwrapped name) of each legend entry; ``for_slide`` may have wrapped the
    names, and keeps the originals in the figure's ``meta``."""
    kept = (fig.layout.meta or {}).get("legend_names") or {}
    return [(i, kept.get(str(i), t.name)) for i, t in enumerate(fig.data) if t.name and t.showlegend is not False]


def legend_plan(fig: go.Figure, canvas_width: int | None = None) -> tuple[int, dict[int, str], float]:
    """How the legend is set on the canvas: 0 columns when every entry fits on one row (each
    as wide as its text), else the number of equal columns the widest entry allows (Plotly's
    ``entrywidthmode="fraction"``, so the rows are the same at every width the chart is drawn
    at); the names, wrapped when even one column is too narrow; and the legend's height in px."""
    entries = _legend_names(fig)
    if not entries:
        return 0, {}, 0.0
    room = text_width(canvas_width) - 40
    widths = [text_px(name, TYPE["legend"]) + _LEGEND_SYMBOL for _, name in entries]
    if sum(widths) <= room:
        return 0, dict(entries), _LEGEND_LINE + 3 + _LEGEND_PAD
    columns = max(1, min(len(entries), int(room // max(widths))))
    wrapped = {i: wrap_px(name, TYPE["legend"], room / columns - _LEGEND_SYMBOL) for i, name in entries}
    height = float(_LEGEND_PAD)
    lines = [wrapped[i][1] for i, _ in entries]
    for start in range(0, len(lines), columns):
        height += max(lines[start : start + columns]) * _LEGEND_LINE + 3
    return columns, {i: text for i, (text, _) in wrapped.items()}, height


def legend_rows(fig: go.Figure, canvas_width: int | None = None) -> int:
    """How many rows the horizontal legend takes on the canvas (``legend_plan``)."""
    columns, names, _ = legend_plan(fig, canvas_width)
    if not names:
        return 0
    return 1 if columns == 0 else math.ceil(len(names) / columns)


def _set_legend(fig: go.Figure, canvas_width: int | None) -> float:
    """The legend laid out for the canvas (``legend_plan``); returns its height."""
    columns, names, height = legend_plan(fig, canvas_width)
    if not names:
        return 0.0
    meta = dict(fig.layout.meta or {})
    meta["legend_names"] = {str(i): name for i, name in _legend_names(fig)}
    fig.update_layout(meta=meta)
    for i, name in names.items():
        fig.data[i].name = name
    if columns:
        fig.update_layout(legend={"entrywidthmode": "fraction", "entrywidth": 1 / columns})
    else:
        fig.update_layout(legend={"entrywidthmode": "pixels", "entrywidth": 0})
    return height


def _top_margin(fig: go.Figure, canvas_width: int | None = None) -> tuple[str, str, int, int]:
    """Title and subtitle wrapped for the canvas, the title's padding from the top edge, and
    the top margin that holds title, subtitle and legend (laid out here too). The unwrapped
    texts are kept in the figure's ``meta`` by ``style``."""
    meta = fig.layout.meta or {}
    size = meta.get("title_size") or TYPE["title"]
    title, title_lines = wrap_px(meta.get("title", ""), size, text_width(canvas_width))
    subtitle, subtitle_lines = wrap_px(meta.get("subtitle", ""), TYPE["subtitle"], text_width(canvas_width))
    legend = _set_legend(fig, canvas_width) if meta.get("legend", True) else 0.0
    line = round(1.3 * size)
    subtitle_height = 0
    if meta.get("subtitle"):
        # Plotly sets a one-line subtitle about 13 px lower than the first line of a longer one
        # (measured in Chromium for titles of 22 to 26 px and one to three lines).
        subtitle_height = round(1.35 * TYPE["subtitle"]) * subtitle_lines + (13 if subtitle_lines == 1 else 0)
    top = 18 + line * title_lines + subtitle_height + _HEADER_GAP
    return title, subtitle, round(top + legend), title_pad(size, title_lines)


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
    x_axis: str = "xaxis",
) -> go.Figure:
    """The look every chart shares, on screen and exported at any slide size: white, large
    type, a plain-word title and subtitle pinned to the top edge, the legend between them and
    the plot (pinned to the plot's top edge, so it never drifts when the export is taller or
    wider than the screen), and the axis titles naming the variables and their transforms.
    Call it after the traces are added (the legend's height depends on them). ``x_axis`` names
    the x axis that carries the x title (the bottom one of stacked panels, e.g. "xaxis2")."""
    size = title_size or TYPE["title"]
    fig.update_layout(
        meta={
            "title": title,
            "subtitle": subtitle,
            "title_size": size,
            "legend": legend,
            "x_title": x_title,
            "y_title": y_title,
            "x_axis": x_axis,
        }
    )
    title, subtitle, top, title_pad = _top_margin(fig)
    fig.update_layout(
        template=TEMPLATE,
        # The type is named on the figure as well as in the template: a reader of the figure's
        # JSON (an export, a test) sees the sizes without resolving the template.
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
        yaxis={"title": {"text": y_title}},
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
    fig.update_layout({x_axis: {"title": {"text": x_title}}})
    return fig


def x_title_axis(fig: go.Figure) -> str:
    """The layout key of the x axis that carries the x title (see ``style``)."""
    meta = fig.layout.meta
    return meta.get("x_axis", "xaxis") if isinstance(meta, dict) else "xaxis"


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


# The toolbar an analyst uses: download for the slide, zoom into a region, back to the whole chart.
MODEBAR_BUTTONS = [["toImage", "zoom2d", "resetScale2d"]]
# Plotly's button titles (its English phrases, plotly.js 3) in Formwise's words, given as the
# dictionary of its default locale, so no other text of plotly's changes.
MODEBAR_WORDS = {
    "Download plot as a PNG": "Download for a slide (PNG)",
    "Download plot": "Download for a slide (SVG)",
    "Zoom": "Zoom: drag across the plot",
    "Reset axes": "Show the whole chart",
}


def export_config(size: str = "full", fmt: str = "png", filename: str = "formwise-chart") -> dict[str, Any]:
    """Plotly's config for a chart: the trimmed toolbar in our words, and its download button
    drawing the chart on the slide canvas (``SLIDE_SIZES``): a PNG at ``EXPORT_SCALE`` times its
    pixels, an SVG at the canvas size itself (scale 1, so the file declares the size it is drawn
    at and drops onto a slide at its real size)."""
    _, width, height = SLIDE_SIZES[size]
    return {
        "displaylogo": False,
        "modeBarButtons": MODEBAR_BUTTONS,
        "locales": {"en-US": {"dictionary": MODEBAR_WORDS}},
        "toImageButtonOptions": {
            "format": fmt,
            "filename": file_stem(filename),
            "width": width,
            "height": height,
            "scale": EXPORT_SCALE if fmt == "png" else 1,
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
        x_title, x_lines = wrap_px(out.layout.meta.get("x_title") or "", TYPE["base"], text_width(canvas_width))
        out.update_layout({x_title_axis(out): {"title": {"text": x_title}}})
        out.update_layout(margin_b=_BOTTOM + round(1.3 * TYPE["base"]) * (x_lines - 1))
    with_caption(out, caption, canvas_width)
    _top_panel(out, SLIDE_SIZES[size][2])
    _bottom_panel(out, SLIDE_SIZES[size][2])
    _fit_y_title(out, SLIDE_SIZES[size][2])
    return out


def _plot_height(fig: go.Figure, slide_height: int) -> float:
    """Height in px of the plot area on the lower of the chart on screen and the slide canvas."""
    height = min(fig.layout.height or 450, slide_height)
    return max(height - (fig.layout.margin.t or 0) - (fig.layout.margin.b or 0), 1)


def _fit_y_title(fig: go.Figure, slide_height: int) -> None:
    """The y-axis title broken into lines no longer than its axis (Plotly centres the title on
    the axis, so a longer one reaches up into the subtitle)."""
    text = (fig.layout.meta or {}).get("y_title")
    if not text:
        return
    low, high = fig.layout.yaxis.domain or (0.0, 1.0)
    room = _plot_height(fig, slide_height) * (high - low) - 10
    fig.update_layout(yaxis_title_text=wrap_px(text, TYPE["base"], room)[0])


def _top_panel(fig: go.Figure, slide_height: int) -> None:
    """A panel of fixed height over the plot (axis y2; its height in px in the figure's
    ``meta`` as ``top_panel_px``), the plot taking the rest. Sized on the lower of the chart on
    screen and the slide canvas, so it is at least that high on both."""
    px = (fig.layout.meta or {}).get("top_panel_px")
    if not px:
        return
    plot = _plot_height(fig, slide_height)
    panel, gap = min(0.45, px / plot), min(0.08, 14 / plot)
    fig.update_layout(yaxis_domain=[0.0, 1.0 - panel - gap], yaxis2_domain=[1.0 - panel, 1.0])


def _bottom_panel(fig: go.Figure, slide_height: int) -> None:
    """A strip of fixed height under the plot (axis y2; its height in px in the figure's
    ``meta`` as ``bottom_panel_px``), sized like ``_top_panel``, so each of its rows keeps
    its height on screen and on every slide."""
    px = (fig.layout.meta or {}).get("bottom_panel_px")
    if not px:
        return
    plot = _plot_height(fig, slide_height)
    panel, gap = min(0.5, px / plot), min(0.08, 20 / plot)
    fig.update_layout(yaxis2_domain=[0.0, panel], yaxis_domain=[panel + gap, 1.0])


def with_caption(fig: go.Figure, caption: str | None, canvas_width: int | None = None) -> go.Figure:
    """The figure with a source line (data file, N, model) under the plot, or unchanged
    without one. Changes the figure it is given (see ``for_slide``)."""
    if not caption:
        return fig
    out = fig
    x_title = out.layout[x_title_axis(out)].title.text or ""
    x_extra = round(1.3 * TYPE["base"]) * x_title.count("<br>")
    bottom = out.layout.margin.b if out.layout.margin.b is not None else 84
    text, lines = wrap_px(html(caption), TYPE["caption"], text_width(canvas_width))
    # Set from the plot's right edge: the right margin is fixed, while the left one grows
    # with the y-axis labels, so a line as wide as the text may be always fits the canvas.
    out.add_annotation(
        text=text,
        xref="paper",
        x=1.0,
        xanchor="right",
        yref="paper",
        y=0.0,
        yanchor="top",
        yshift=-_CAPTION_GAP[bool(x_title)] - x_extra,
        showarrow=False,
        align="right",
        font={"size": TYPE["caption"], "color": SUBTLE},
        name="caption",
    )
    out.update_layout(margin={"b": bottom + 8 + round(1.4 * TYPE["caption"]) * lines})
    return out


def legend_dot(fig: go.Figure, name: str, colour: str, size: int = 8, symbol: str = "circle") -> None:
    """A legend entry for faint dots (or a shaded area, as a square), drawn so it can be seen."""
    marker = {"color": colour, "size": size, "symbol": symbol}
    fig.add_trace(go.Scatter(x=[None], y=[None], mode="markers", name=name, marker=marker, hoverinfo="skip"))


def legend_square(fig: go.Figure, name: str, colour: str) -> None:
    """A legend entry for a shaded area (a band or a strip), which has none of its own."""
    legend_dot(fig, name, colour, size=16, symbol="square")


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
