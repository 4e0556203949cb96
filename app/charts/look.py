"""The Formwise look of a plotly chart: the template (registered once) and the text measure
the layout of titles and legends relies on. No streamlit import."""

from __future__ import annotations

import plotly.graph_objects as go
import plotly.io as pio

from core.output.theme import BLUE, FONT, GREEN, GREY, GRID, INK, ORANGE, PURPLE, SHADE, SKY, TYPE, VERMILLION

TEMPLATE = "formwise"


def _register_template() -> None:
    """The Formwise plotly template, registered once: the palette, type and grid of
    ``core.output.theme`` (the report's matplotlib charts read the same), plain white ground,
    light grid on both axes, no zero lines and no tick marks, a thin baseline under the plot."""
    axis = {
        "gridcolor": GRID, "gridwidth": 1, "zeroline": False, "ticks": "", "automargin": True,
        "tickfont": {"size": TYPE["base"], "color": INK},
        "title": {"font": {"size": TYPE["base"], "color": INK}, "standoff": 14},
    }  # fmt: skip
    pio.templates[TEMPLATE] = go.layout.Template(
        layout={
            "font": {"family": FONT, "size": TYPE["base"], "color": INK},
            "paper_bgcolor": "white",
            "plot_bgcolor": "white",
            "colorway": [BLUE, ORANGE, SKY, VERMILLION, GREEN, PURPLE, GREY],
            "separators": ".,",
            # Tick labels stand off the plot so the first x label and the lowest y label never meet at the corner.
            "xaxis": {**axis, "showline": True, "linecolor": SHADE, "linewidth": 1.5, "ticklabelstandoff": 12},
            "yaxis": {**axis, "ticklabelstandoff": 8},
            "legend": {"font": {"size": TYPE["legend"], "color": INK}, "bgcolor": "rgba(255,255,255,0)"},
            "hoverlabel": {
                "font": {"family": FONT, "size": TYPE["note"], "color": INK},
                "bgcolor": "white",
                "bordercolor": SHADE,
            },
            "modebar": {"bgcolor": "rgba(255,255,255,0.9)", "color": GREY, "activecolor": BLUE},
            "annotationdefaults": {"font": {"size": TYPE["note"], "color": INK}},
        }
    )


if TEMPLATE not in pio.templates:
    _register_template()


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


# Advance widths in 1/1000 em of Helvetica (Adobe's core-font metrics, recalled from memory;
# Arial and Liberation Sans share them, and the rendered legends of the overlap test match
# them): the fonts a chart falls back to when Source Sans Pro is not installed.
_WIDTHS = dict(
    zip(
        " !\"#$%&'()*+,-./0123456789:;<=>?@ABCDEFGHIJKLMNOPQRSTUVWXYZ[\\]^_`abcdefghijklmnopqrstuvwxyz{|}~",
        [278, 278, 355, 556, 556, 889, 667, 191, 333, 333, 389, 584, 278, 333, 278, 278] + [556] * 10
        + [278, 278, 584, 584, 584, 556, 1015, 667, 667, 722, 722, 667, 611, 778, 722, 278, 500, 667, 556, 833,
           722, 778, 667, 778, 722, 667, 611, 722, 667, 944, 667, 667, 611, 278, 278, 278, 469, 556, 333, 556,
           556, 500, 556, 556, 278, 556, 556, 222, 222, 500, 222, 833, 556, 556, 556, 556, 333, 500, 278, 556,
           500, 722, 500, 500, 500, 334, 260, 334, 584],
        strict=True,
    )
)  # fmt: skip
_WIDE = {"—": 1000, "→": 1000, "←": 1000, "–": 556, "−": 584, "×": 584, "÷": 584, "≈": 584, "·": 278, "λ": 556}


def text_px(text: str, size: float) -> float:
    """About how wide ``text`` is at ``size`` px in the chart's font: Helvetica's widths, 5 %
    more for the wider fallbacks (Segoe UI), 0.6 em for any character not listed."""
    return 1.05 * size * sum(_WIDTHS.get(c) or _WIDE.get(c, 600) for c in text) / 1000


def wrap_px(text: str, size: float, width: float) -> tuple[str, int]:
    """Text broken at spaces into lines no wider than ``width`` px (``text_px``), joined with
    <br>; and the number of lines."""
    lines: list[str] = []
    for word in text.split(" "):
        if lines and text_px(f"{lines[-1]} {word}", size) <= width:
            lines[-1] += " " + word
        else:
            lines.append(word)
    return "<br>".join(lines), max(1, len(lines))
