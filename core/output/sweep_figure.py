"""The report's chart of the sweep over functional forms: every model's focus effect on the
common percent scale with its 95 % interval, smallest to largest, the best model by AIC on the
original scale marked. Laid out like every report chart (``core.output.figures``: measured
text, wrapped titles, thinned ticks); which form each variable took is the table beside it."""

from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib.figure import Figure

from core.output.figures import MARGIN, Axis, Canvas, _fit_axes, _floats, _header, _line, _plain_axes, _pt, _range, drawing_style
from core.output.theme import GREY, INK, SKY, VERMILLION


def sweep_figure(sweep: dict[str, Any], size: str = "full") -> Figure:
    """The focus effect across the sweep's models (see the module docstring)."""
    ranked = sweep["models"]  # best by AIC first
    order = sorted(range(len(ranked)), key=lambda i: (ranked[i]["percent"] is None, ranked[i]["percent"] or 0.0))
    pct = _floats([ranked[i]["percent"] for i in order])
    low = _floats([ranked[i]["percent_ci_low"] for i in order])
    high = _floats([ranked[i]["percent_ci_high"] for i in order])
    x = np.arange(1, len(order) + 1, dtype=float)
    with drawing_style():
        canvas = Canvas.new(size)
        ax = canvas.fig.add_axes((0.1, 0.1, 0.8, 0.8))
        _plain_axes(ax)
        ax.axhline(0, color=GREY, linewidth=_pt(1))
        shown = np.isfinite(pct)
        # Many models: thinner marks, so neighbouring intervals stay apart.
        width = 2.0 if len(order) <= 64 else 1.0
        ax.vlines(x[shown], low[shown], high[shown], color=SKY, linewidth=_pt(width))
        ax.plot(x[shown], pct[shown], "o", color=INK, markersize=_pt(5 if len(order) <= 64 else 3), markeredgewidth=0)
        best = order.index(0)
        if shown[best]:
            ax.plot(
                [x[best]],
                [pct[best]],
                "D",
                color=VERMILLION,
                markersize=_pt(13),
                markerfacecolor="none",
                markeredgewidth=_pt(2.5),
            )
        ax.set_xlim(0.5 - 0.01 * len(order), len(order) + 0.5 + 0.01 * len(order))
        ax.set_ylim(*_range([pct, low, high], include=[0.0]))
        focus = sweep["focus"]
        handles = [_line(INK, 0, ""), _line(SKY, 2.0), _line(VERMILLION, 0, "")]
        handles[0].set_marker("o")
        handles[2].set_marker("D")
        handles[2].set_markerfacecolor("none")
        labels = ["Effect in one model", "Its 95 % interval", "Best model by AIC (original scale)"]
        top = _header(
            canvas,
            f"How much the effect of {focus['change']} in {focus['column']} depends on the forms",
            f"{len(order)} models on the same {sweep['n_obs']:,} rows, sorted by the effect",
            handles,
            labels,
        )
        _fit_axes(
            canvas,
            ax,
            (MARGIN, MARGIN, canvas.width - MARGIN, top),
            Axis("Models, smallest effect to largest"),
            Axis("Change of expected outcome (%)", " %"),
        )
    return canvas.fig
