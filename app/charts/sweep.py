"""The sweep's figure: the focus effect of every model, smallest to largest, with its interval,
and beneath it the form each variable took in that model (one row of cells per variable)."""

from __future__ import annotations

from typing import Any

import plotly.graph_objects as go
from plotly.subplots import make_subplots

from app.charts.base import style
from core.output.theme import BLUE, GREEN, GREY, INK, ORANGE, PURPLE, SKY, TYPE, VERMILLION

# One colour per transform code in the strip beneath (Okabe-Ito, core.output.theme).
_ROW_PX = 26
FORM_COLOURS = {"level": GREY, "log": BLUE, "ihs": SKY, "sqrt": GREEN, "quadratic": PURPLE, "shifted_log:1": ORANGE}


def _whiskers(models: list[dict[str, Any]], pct: list[Any]) -> dict[str, Any]:
    """Each model's 95 % interval as whiskers around its effect."""
    high = [(m["percent_ci_high"] or p) - p if p is not None else None for m, p in zip(models, pct, strict=True)]
    low = [p - (m["percent_ci_low"] or p) if p is not None else None for m, p in zip(models, pct, strict=True)]
    return {"type": "data", "symmetric": False, "array": high, "arrayminus": low, "color": SKY, "thickness": 1.5, "width": 0}


def _strip(fig: go.Figure, models: list[dict[str, Any]], varying: list[str]) -> None:
    """Beneath the effects: one row per variable, a cell per model in the colour of its form.

    One heatmap, not a marker per model and variable: with 512 models and nine variables the
    markers were 4,608 shapes for the browser to lay out and paint, and redrawing the view at
    1,000,000 rows took 0.96 to 1.0 s against 0.65 to 0.67 s with the heatmap (two runs each).
    The legend names each form shown through an empty marker trace of its colour."""
    codes = [c for c in FORM_COLOURS if any(m["transforms"][v] == c for m in models for v in varying)]
    if not codes:
        return
    index = {c: i for i, c in enumerate(codes)}
    steps = len(codes)
    scale = [[edge / steps, FORM_COLOURS[c]] for i, c in enumerate(codes) for edge in (i, i + 1)]
    fig.add_trace(
        go.Heatmap(
            x=list(range(1, len(models) + 1)),
            y=varying,
            z=[[index.get(m["transforms"][v]) for m in models] for v in varying],
            customdata=[[m["transforms"][v] for m in models] for v in varying],
            zmin=-0.5,
            zmax=steps - 0.5,
            colorscale=scale,
            showscale=False,
            xgap=1 if len(models) <= 128 else 0,
            ygap=_ROW_PX - 8,
            hovertemplate="model %{x}: %{y} %{customdata}<extra></extra>",
            name="forms",
        ),
        row=2,
        col=1,
    )
    for code in codes:
        fig.add_trace(
            go.Scatter(
                x=[None], y=[None], mode="markers", marker={"color": FORM_COLOURS[code], "size": 8, "symbol": "square"}, name=code
            ),
            row=2,
            col=1,
        )


def sweep_figure(sweep: dict[str, Any], current: dict[str, str], varying: list[str]) -> go.Figure:
    models = sorted(sweep["models"], key=lambda m: (m["percent"] is None, m["percent"] or 0.0))
    rank = {id(m): i + 1 for i, m in enumerate(sweep["models"])}  # 1 = best by AIC
    x = list(range(1, len(models) + 1))
    rows = max(1, len(varying))
    # The strip gives each variable a row of _ROW_PX, enough for its name at the base type size
    # (base._bottom_panel keeps it so on every slide size); the effects panel has the rest.
    strip, panel = _ROW_PX * rows, 300
    fig = make_subplots(rows=2, cols=1, shared_xaxes=True)
    pct = [m["percent"] for m in models]
    fig.add_trace(
        go.Scatter(
            x=x,
            y=pct,
            mode="markers",
            marker={"color": INK, "size": 6},
            error_y=_whiskers(models, pct),
            name="Effect with 95 % interval",
            showlegend=False,  # the subtitle says what the dots and bars are
            customdata=[rank[id(m)] for m in models],
            hovertemplate="AIC rank %{customdata}<br>%{y:.2f} %<extra></extra>",
        ),
        row=1,
        col=1,
    )
    # Different shapes, so a model that is both the best and the one on screen shows both marks.
    for label, colour, symbol, size, pick in (
        ("Best by AIC", VERMILLION, "diamond-open", 15, lambda m: rank[id(m)] == 1),
        ("Model on screen", ORANGE, "circle-open", 24, lambda m: m["transforms"] == current),
    ):
        found = [(i + 1, m["percent"]) for i, m in enumerate(models) if pick(m)]
        if found:
            fig.add_trace(
                go.Scatter(
                    x=[f[0] for f in found],
                    y=[f[1] for f in found],
                    mode="markers",
                    marker={"color": colour, "size": size, "symbol": symbol, "line": {"width": 3}},
                    name=label,
                ),
                row=1,
                col=1,
            )
    _strip(fig, models, varying)
    fig.update_yaxes(nticks=5, row=1, col=1)
    names = list(reversed(varying))
    fig.update_yaxes(
        categoryorder="array",
        categoryarray=names,
        tickmode="array",
        tickvals=names,
        ticktext=names,
        tickfont={"size": TYPE["caption"]},
        row=2,
        col=1,
    )
    focus = sweep["focus"]
    fig.add_hline(y=0, line={"color": GREY, "width": 1}, row=1, col=1)
    fig = style(
        fig,
        f"Does the effect of {focus['change']} in {focus['column']} depend on the forms?",
        f"{len(models)} models on the same {sweep['n_obs']:,} rows; dots: effect as % change of the expected "
        "outcome, bars: 95 % interval. Below: each variable's form",
        "Models, smallest effect to largest",
        "Effect, %",
        height=min(720, 300 + panel + strip),  # no taller than a slide, so screen and export agree
        x_axis="xaxis2",
    )
    fig.update_layout(meta={**fig.layout.meta, "bottom_panel_px": strip})
    return fig
