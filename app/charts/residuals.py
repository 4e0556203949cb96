"""The residual checks, one question per chart, each titled with its verdict in plain words:
the spread of the residuals band by band, their tails against a bell curve, and the mean
residual band by band (docs/contract.md §1, part ``residuals``)."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import plotly.graph_objects as go

from app.charts.base import BLUE, GREY, INK, ORANGE, VERMILLION, floats, legend_dot, style
from core.output.escape import html
from core.output.numbers import compact

_BOX_WIDTH = 0.62  # of a band's column
_PALE_SKY = "#BBE1F6"  # SKY at 0.4 on white: opaque, so the rows behind do not speckle the band


def _dot_opacity(n: int) -> float:
    return 0.55 if n <= 2_000 else 0.3 if n <= 8_000 else 0.16


def _band_positions(fitted: np.ndarray, bands: list[dict[str, Any]]) -> np.ndarray:
    """Each sampled row's place on the band axis: its band's number, spread across the band's
    column by the row's rank of fitted value within the band, so a column reads low to high."""
    edges = np.array([b["high"] for b in bands[:-1]], dtype=float)
    band = np.searchsorted(edges, fitted, side="left")
    where = np.empty(len(fitted), dtype=float)
    for i in range(len(bands)):
        rows = np.flatnonzero(band == i)
        rank = np.argsort(np.argsort(fitted[rows], kind="stable"), kind="stable")
        where[rows] = i - 0.42 + 0.84 * (rank + 0.5) / max(len(rows), 1)
    return where


def _band_ticks(bands: list[dict[str, Any]]) -> dict[str, Any]:
    """Each band named by its middle fitted value; every other one when there are many."""
    step = 2 if len(bands) > 8 else 1
    shown = list(range(0, len(bands), step))
    return {"tickmode": "array", "tickvals": shown, "ticktext": [compact(bands[i]["mid"]) for i in shown], "tickangle": 0}


def _band_boxes(fig: go.Figure, bands: list[dict[str, Any]]) -> None:
    """Each band's middle 80 % and middle half of residuals as boxes, and its median as a
    white bar. Drawn as filled outlines (scatter traces), so they lie over the rows' dots."""
    where = np.arange(len(bands), dtype=float)
    half = _BOX_WIDTH / 2
    for low, high, colour, name in (("q10", "q90", _PALE_SKY, "Band's middle 80 %"), ("q25", "q75", BLUE, "Band's middle half")):
        xs = [v for i in where for v in (i - half, i + half, i + half, i - half, i - half, None)]
        ys = [v for b in bands for v in (b[low], b[low], b[high], b[high], b[low], None)]
        fig.add_trace(
            go.Scatter(
                x=xs, y=ys, mode="lines", fill="toself", fillcolor=colour, line={"width": 0, "color": colour},
                name=name, hoverinfo="skip",
            )
        )  # fmt: skip
    fig.add_trace(
        go.Scatter(
            x=where,
            y=[b["q50"] for b in bands],
            mode="markers",
            marker={"symbol": "line-ew", "size": 24, "line": {"color": "white", "width": 3}},
            showlegend=False,
            customdata=[[compact(b["low"]), compact(b["high"]), b["n"], b["q25"], b["q75"]] for b in bands],
            hovertemplate="fitted %{customdata[0]} to %{customdata[1]}, %{customdata[2]:,} rows<br>"
            "middle half %{customdata[3]:.3g} to %{customdata[4]:.3g}, median %{y:.3g}<extra></extra>",
        )
    )


def spread_figure(data: dict[str, Any], headline: str, fitted_label: str) -> go.Figure:
    """Is the spread even? The rows as a strip per band of fitted values, each band's middle
    half and middle 80 % of residuals as boxes over them, and the middle half of all rows as a
    dashed corridor: an even spread keeps every box inside the corridor's height."""
    bands = data["spread_bands"]
    fig = go.Figure()
    fig.add_trace(
        go.Scatter(
            x=_band_positions(floats(data["fitted"]), bands),
            y=data["resid"],
            mode="markers",
            marker={"color": GREY, "size": 4, "opacity": _dot_opacity(data["shown"])},
            showlegend=False,
            hovertemplate="residual %{y:.3g}<extra>a row</extra>",
        )
    )
    legend_dot(fig, "Rows" + (" (a sample)" if data["shown"] < data["n"] else ""), GREY, size=6)
    _band_boxes(fig, bands)
    everyone = data["spread_all"]
    for edge in ("q25", "q75"):
        fig.add_hline(y=everyone[edge], line={"color": ORANGE, "width": 2, "dash": "dash"})
    fig.add_trace(
        go.Scatter(
            x=[None], y=[None], mode="lines", name="Middle half, all rows", line={"color": ORANGE, "width": 2, "dash": "dash"}
        )
    )
    per_band = bands[0]["n"] if bands else 0
    style(
        fig,
        html(headline),
        f"Residuals in {len(bands)} bands of fitted values, about {per_band:,} rows each; "
        "an even spread gives boxes of one height",
        f"Fitted {html(fitted_label)}, middle of each band",
        "Residual",
        height=560,
        title_size=24,
    )
    fig.update_layout(xaxis=_band_ticks(bands) | {"range": [-0.6, len(bands) - 0.4]})
    return fig


_SIDES = {"above": "+", "below": "\u2212"}


def _tail_ticks(low: float, high: float) -> tuple[list[float], list[str]]:
    """Shares in % on a log axis: 1-3-10 steps, decades alone when the range is wide."""
    steps = [v * 10.0**k for k in range(-4, 3) for v in (1.0, 3.0)]
    inside = [v for v in steps if low <= v <= high]
    if len(inside) > 7:
        inside = [v for v in inside if math.isclose(math.log10(v) % 1, 0, abs_tol=1e-9)]
    return inside, [f"{v:g} %" for v in inside]


def tails_figure(data: dict[str, Any], headline: str) -> go.Figure:
    """Are the residuals shaped like a bell? For each distance from zero (1, 2 and 3 standard
    deviations, each side), the share of the rows out there with its 95 % interval beside the
    share a bell curve puts there, on a log scale so the far tails read as well as the near."""
    tails = sorted(data["tails"], key=lambda t: (t["side"] == "below", t["point"] if t["side"] == "below" else -t["point"]))
    labels = [f"{t['side']} {_SIDES[t['side']]}{t['point']:g}" for t in tails]
    where = np.arange(len(tails), dtype=float)[::-1]
    share = np.array([t["share"] for t in tails]) * 100
    normal = np.array([t["normal_share"] for t in tails]) * 100
    low, high = np.array([t["low"] for t in tails]) * 100, np.array([t["high"] for t in tails]) * 100
    positive = np.concatenate([share[share > 0], low[low > 0], normal])
    floor = float(positive.min()) / 2.5
    drawn = np.where(share > 0, share, floor)
    outside = (normal < low) | (normal > high)
    fig = go.Figure()
    segments_x = [v for a, b in zip(normal, drawn, strict=True) for v in (a, b, None)]
    segments_y = [v for y in where for v in (y, y, None)]
    fig.add_trace(
        go.Scatter(x=segments_x, y=segments_y, mode="lines", line={"color": GREY, "width": 2}, showlegend=False, hoverinfo="skip")
    )
    for mask, colour, name in (
        (~outside, BLUE, "Share of the rows"),
        (outside, VERMILLION, "Far from a bell curve"),
    ):
        if not mask.any():
            continue
        fig.add_trace(
            go.Scatter(
                x=drawn[mask],
                y=where[mask],
                mode="markers",
                name=name,
                marker={
                    "color": colour,
                    "size": 14,
                    "symbol": ["circle" if s > 0 else "triangle-left" for s in share[mask]],
                    "line": {"color": "white", "width": 1.5},
                },
                error_x={
                    "type": "data",
                    "symmetric": False,
                    "array": np.maximum(high[mask] - drawn[mask], 0),
                    "arrayminus": np.maximum(drawn[mask] - np.maximum(low[mask], floor), 0),
                    "color": colour,
                    "thickness": 2.5,
                    "width": 6,
                },  # fmt: skip
                customdata=[[t["count"]] for t, m in zip(tails, mask, strict=True) if m],
                hovertemplate="%{customdata[0]:,} rows<extra></extra>",
            )
        )
    fig.add_trace(
        go.Scatter(
            x=normal,
            y=where,
            mode="markers",
            name="Bell curve's share",
            marker={"symbol": "circle-open", "size": 18, "color": INK, "line": {"width": 2.5}},
            hovertemplate="a bell curve: %{x:.3g} % of rows<extra></extra>",
        )
    )
    ticks, words = _tail_ticks(floor, float(max(high.max(), normal.max())))
    style(
        fig,
        html(headline),
        f"Share of the {data['n']:,} rows beyond 1, 2 and 3 standard deviations on each side, with 95 % intervals"
        + (" (a triangle: none)" if (share == 0).any() else ""),
        "Share of the rows (log scale)",
        "Standardised residual",
        height=560,
        title_size=24,
    )
    span = [math.log10(floor) - 0.1, math.log10(float(max(high.max(), normal.max()))) + 0.15]
    fig.update_layout(
        xaxis={"type": "log", "range": span, "tickmode": "array", "tickvals": ticks, "ticktext": words},
        yaxis={"tickmode": "array", "tickvals": where.tolist(), "ticktext": labels, "range": [-0.6, len(tails) - 0.4]},
    )
    return fig


def curvature_figure(data: dict[str, Any], headline: str, fitted_label: str) -> go.Figure:
    """Is a curve missing? The mean residual of each band of fitted values with its 95 %
    interval; a model with the right shape leaves them scattered around zero, a missing curve
    bends them into an arc. Bands whose interval misses zero are drawn in the warning colour."""
    bands = data["mean_bands"]
    mid, mean = floats([b["mid"] for b in bands]), floats([b["mean"] for b in bands])
    low, high = floats([b["low"] for b in bands]), floats([b["high"] for b in bands])
    off = (low > 0) | (high < 0)
    fig = go.Figure()
    fig.add_hline(y=0, line={"color": INK, "width": 2})
    for mask, colour, name in ((~off, BLUE, "Mean of a band"), (off, VERMILLION, "Interval misses zero")):
        if not mask.any():
            continue
        fig.add_trace(
            go.Scatter(
                x=mid[mask],
                y=mean[mask],
                mode="markers",
                name=name,
                marker={"color": colour, "size": 13, "symbol": "diamond", "line": {"color": "white", "width": 1.5}},
                error_y={
                    "type": "data",
                    "symmetric": False,
                    "array": high[mask] - mean[mask],
                    "arrayminus": mean[mask] - low[mask],
                    "color": colour,
                    "thickness": 3,
                    "width": 0,
                },  # fmt: skip
                customdata=[[b["n"]] for b, m in zip(bands, mask, strict=True) if m],
                hovertemplate="fitted %{x:.4g}, %{customdata[0]:,} rows<br>mean residual %{y:.3g}<extra></extra>",
            )
        )
    per_band = bands[0]["n"] if bands else 0
    style(
        fig,
        html(headline),
        f"Mean residual in {len(bands)} bands of fitted values, about {per_band:,} rows each, with 95 % intervals; "
        "with nothing missing they scatter around zero",
        f"Fitted {html(fitted_label)}, middle of each band",
        "Mean residual",
        height=560,
        title_size=24,
    )
    return fig


def check_figures(data: dict[str, Any], verdicts: list[dict[str, Any]], fitted_label: str) -> dict[str, go.Figure]:
    """The chart of each residual check by its key ('spread', 'shape', 'curve'), titled with
    its verdict (``core.output.text.check_verdicts``)."""
    headline = {v["check"]: v["headline"] for v in verdicts}
    return {
        "spread": spread_figure(data, headline.get("spread", "How the spread varies"), fitted_label),
        "shape": tails_figure(data, headline.get("shape", "The tails against a bell curve")),
        "curve": curvature_figure(data, headline.get("curve", "The mean residual band by band"), fitted_label),
    }
