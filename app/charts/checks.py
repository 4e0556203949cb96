"""Residual checks, distributions and the Box-Cox profile."""

from __future__ import annotations

from typing import Any

import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from app.charts.base import BLUE, FONT, GRID, INK, ORANGE, SKY, SUBTLE, TYPE, VERMILLION, floats, style
from core.output.escape import html


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
    return style(
        fig,
        "Residuals against fitted values",
        "Good: an even cloud around zero, flat red line",
        f"Fitted {html(fitted_label)}",
        "Residual",
        height=470,
        title_size=22,
    )


def qq_figure(data: dict[str, Any]) -> go.Figure:
    theory = floats(data["qq_theory"])
    sample = floats(data["qq_sample"])
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
    return style(
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
    return style(
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
    return style(
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
    style(fig, f"{column} as recorded", subtitle, column, "Rows", height=420, legend=False)
    fig.update_layout(bargap=0)
    return fig


def _skew_text(value: float | None) -> str:
    return "n/a" if value is None else f"{value:.2f}".replace("-", "\u2212")


def boxcox_figure(boxcox: dict[str, Any], outcome_column: str) -> go.Figure:
    """The profile log-likelihood of the Box-Cox power λ, with λ̂, its 95 % interval and the
    two powers people usually choose between: 0 (log) and 1 (level)."""
    outcome_column = html(outcome_column)
    lam = floats(boxcox["profile"]["lambda"])
    loglik = floats(boxcox["profile"]["loglik"])
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
    return style(
        fig,
        f"Which power of {outcome_column} fits best (Box-Cox)",
        f"Higher is better; {outcome_column} is modelled on the regressors as they are transformed now",
        "Power λ of the outcome (0 = log, 0.5 ≈ square root, 1 = level)",
        "Profile log-likelihood",
        height=520,
    )
