"""The variables' distributions, a column profile's histogram and the Box-Cox profile (the
residual checks themselves are in ``app.charts.residuals``)."""

from __future__ import annotations

from typing import Any

import numpy as np
import plotly.graph_objects as go
from plotly.subplots import make_subplots

from app.charts.base import BLUE, GRID, INK, SKY, TYPE, VERMILLION, floats, style
from core.output.escape import html
from core.output.numbers import signed


# --- distributions ------------------------------------------------------------------------------------------
def distribution_figure(item: dict[str, Any]) -> go.Figure:
    """One variable's histogram as recorded and, beside it, as transformed; each panel named
    under it, the skewness of both in the subtitle."""
    label = html(item["label"])
    panels = [("raw", "As recorded")]
    subtitle = f"Skewness {_skew_text(item['skew_raw'])} as recorded"
    if item.get("transformed"):
        panels.append(("transformed", f"As {label}"))
        subtitle += f", {_skew_text(item['skew_transformed'])} as {label}"
    fig = make_subplots(rows=1, cols=len(panels), horizontal_spacing=0.12)
    for i, (key, _) in enumerate(panels, start=1):
        hist = item[key]
        edges = np.array(hist["edges"], dtype=float)
        fig.add_trace(
            go.Bar(
                x=(edges[:-1] + edges[1:]) / 2,
                y=hist["counts"],
                width=float(edges[1] - edges[0]) * 0.96,
                marker={"color": SKY if key == "raw" else BLUE, "line": {"width": 0}},
                showlegend=False,
                hovertemplate="%{x:.4g}<br>%{y:,} rows<extra></extra>",
            ),
            row=1,
            col=i,
        )
    style(
        fig, f"{html(item['column'])} ({item['role']})", subtitle, panels[0][1], "Rows", height=380, legend=False, title_size=22
    )
    fig.update_layout(bargap=0.02)
    fig.update_xaxes(nticks=6, tickangle=0)
    if len(panels) > 1:
        fig.update_layout(xaxis2_title_text=panels[1][1])
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
    """Which power of the outcome fits best, drawn as the report draws it: the profile as the
    drop from the best log-likelihood (0 at the top, so higher is better) with log, level and
    the best power marked on it, and a number line above the plot with the powers the data
    accept at 95 % as a bar; the best power is named above the line, log and level below it,
    so no two names meet however close the powers are."""
    outcome_column = html(outcome_column)
    lam, drop = _profile(boxcox)
    best, low, high = float(boxcox["lambda"]), boxcox.get("ci_low"), boxcox.get("ci_high")
    marks = _marks(lam, drop, best)
    fig = go.Figure()
    fig.add_trace(
        go.Scatter(
            x=lam,
            y=drop,
            mode="lines",
            name="Log-likelihood of each power, less the best",
            line={"color": BLUE, "width": 3.5},
            hovertemplate="λ %{x:.2f}<br>%{y:,.2f} below the best<extra></extra>",
        )
    )
    _ruler_line(fig, lam)
    if low is not None and high is not None:
        fig.add_trace(
            go.Scatter(
                x=[low, high],
                y=[0, 0],
                xaxis="x2",
                yaxis="y2",
                mode="lines",
                name=f"Powers the data accept (95 %): {signed(low)} to {signed(high)}",
                line={"color": _INTERVAL, "width": 16},
                hoverinfo="skip",
            )
        )
    for word, where, value, symbol, colour in marks:
        fig.add_trace(
            go.Scatter(
                x=[where],
                y=[value],
                mode="markers",
                showlegend=False,
                marker={
                    "symbol": symbol,
                    "size": 15 if symbol == "circle" else 13,
                    "color": colour,
                    "line": {"color": INK if colour == "white" else "white", "width": 2.5 if colour == "white" else 1.5},
                },
                hovertemplate=f"{word}: λ {where:.2f}<br>%{{y:,.2f}} below the best<extra></extra>",
            )
        )
    _ruler(fig, marks)
    style(
        fig,
        f"Which power of {outcome_column} fits best (Box-Cox)",
        f"Higher is better; {outcome_column} is modelled on the regressors as they are transformed now",
        "Power λ of the outcome (0 = log, 0.5 ≈ square root, 1 = level)",
        "Log-likelihood, less the best",
        height=700,
    )
    span = float(np.nanmax(lam) - np.nanmin(lam)) or 1.0
    fig.update_layout(
        xaxis={"range": [float(np.nanmin(lam)) - 0.02 * span, float(np.nanmax(lam)) + 0.02 * span]},
        yaxis={"domain": [0.0, 0.7]},
        xaxis2={"matches": "x", "anchor": "y2", "visible": False},
        yaxis2={"domain": [0.78, 1.0], "anchor": "x2", "range": [-1, 1], "visible": False, "fixedrange": True},
        meta={**fig.layout.meta, "top_panel_px": _RULER_PX},
    )
    return fig


_INTERVAL = "rgba(86, 180, 233, 0.6)"  # SKY at the report's 0.6
# Height of the number line's panel: a name above the line and one below, each 14 px off it.
_RULER_PX = 84


def _profile(boxcox: dict[str, Any]) -> tuple[np.ndarray, np.ndarray]:
    """The powers tried and each one's log-likelihood less the best (0 at the best)."""
    lam, loglik = floats(boxcox["profile"]["lambda"]), floats(boxcox["profile"]["loglik"])
    peak = boxcox.get("loglik_max")
    return lam, loglik - (float(peak) if peak is not None else float(np.nanmax(loglik)))


def _marks(lam: np.ndarray, drop: np.ndarray, best: float) -> list[tuple[str, float, float, str, str]]:
    """(name, λ, drop, marker, colour) for the best power, log and level, where the profile reaches them."""
    ok = np.isfinite(lam) & np.isfinite(drop)
    lam, drop = lam[ok], drop[ok]
    marks = [(f"best {signed(best)}", best, 0.0, "circle", VERMILLION)]
    for value, word, symbol in ((0.0, "log", "square"), (1.0, "level", "diamond")):
        if lam.size and lam.min() <= value <= lam.max():
            marks.append((word, value, float(np.interp(value, lam, drop)), symbol, "white"))
    return marks


def _ruler_line(fig: go.Figure, lam: np.ndarray) -> None:
    """The number line over the plot (axes x2, y2): a thin line across the powers tried."""
    ends = [float(np.nanmin(lam)), float(np.nanmax(lam))]
    fig.add_trace(
        go.Scatter(
            x=ends, y=[0, 0], xaxis="x2", yaxis="y2", mode="lines", line={"color": GRID, "width": 3},
            showlegend=False, hoverinfo="skip",
        )
    )  # fmt: skip


def _ruler(fig: go.Figure, marks: list[tuple[str, float, float, str, str]]) -> None:
    """A tick on the number line for each mark, the best power's name above the line and the
    others' below it."""
    for word, where, _, _, colour in marks:
        ink = VERMILLION if colour == VERMILLION else INK
        fig.add_trace(
            go.Scatter(
                x=[where], y=[0], xaxis="x2", yaxis="y2", mode="markers", showlegend=False, hoverinfo="skip",
                marker={"symbol": "line-ns", "size": 24, "line": {"color": ink, "width": 3}},
            )
        )  # fmt: skip
        above = colour == VERMILLION
        fig.add_annotation(
            x=where,
            y=0,
            xref="x2",
            yref="y2",
            yanchor="bottom" if above else "top",
            yshift=14 if above else -14,
            text=word,
            showarrow=False,
            font={"size": TYPE["note"], "color": ink},
        )
