"""The approximation check and the units check: exact against first-order effects."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
import plotly.graph_objects as go

from app.charts.base import BLUE, ORANGE, PURPLE, TYPE, VERMILLION, floats, legend_square, style
from core.output.escape import html
from core.output.unit_words import label

OWN = "in its own units"  # an axis in a column's units when none is named


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


# Plot-area width in pixels of the narrowest canvas a chart is drawn on (a half slide, 640 px,
# less the margins and the y-axis labels), and the width of a character of the band labels.
_PLOT_PIXELS = 460
_CHAR_PIXELS = 0.55 * TYPE["note"]


def _band_label(tolerance_pct: float, width_share: float, on_left: bool) -> tuple[str, bool]:
    """The band's label and whether it fits inside the band on the narrowest canvas; a label
    that does not is set beside the band, in the stretch where the approximation holds,
    pointing at it."""
    words = f"off by > {tolerance_pct:g} % beyond here"
    inside = width_share * _PLOT_PIXELS >= (len(words) + 2) * _CHAR_PIXELS + 12
    if not inside:
        words = f"off by > {tolerance_pct:g} %"
    return (f"← {words}" if on_left else f"{words} →"), inside


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


def effect_subtitle(outcome_column: str, outcome_label: str, percent_effect: bool, unit: str | None = None) -> str:
    """'Effect as % change in weekly_revenue (model of log of weekly_revenue), other regressors
    held at their reference values': the effect is on the outcome itself, whatever its transform."""
    what = f"% change in {outcome_column}" if percent_effect else f"change in {label(outcome_column, unit, 'its own units')}"
    model = f" (model of {outcome_label})" if outcome_label != outcome_column else ""
    return f"Effect as {what}{model}, other regressors held at their reference values"


def _tolerance_bands(fig: go.Figure, sizes: np.ndarray, approx: np.ndarray, exact: np.ndarray, tolerance_pct: float) -> None:
    """Shaded stretches where the approximation misses by more than the tolerance, labelled."""
    regions = tolerance_regions(sizes, approx, exact, tolerance_pct / 100)
    band = f"Approximation off by more than {tolerance_pct:g} %"
    span = float(np.nanmax(sizes) - np.nanmin(sizes)) or 1.0
    labels = [_band_label(tolerance_pct, (right - left) / span, right <= 0) for left, right in regions]
    # A label set beside its band reaches into the middle stretch, towards the other band's
    # label: then the right band's label sits a line lower, so the two never meet.
    lower = len(regions) > 1 and not all(inside for _, inside in labels)
    for (left, right), (text, inside) in zip(regions, labels, strict=True):
        fig.add_vrect(x0=left, x1=right, fillcolor=PURPLE, opacity=0.13, line_width=0, layer="below")
        on_left = right <= 0
        fig.add_annotation(
            x=right if on_left else left,
            xanchor=("right" if on_left else "left") if inside else ("left" if on_left else "right"),
            y=1.0,
            yref="paper",
            yanchor="top",
            yshift=-1.5 * TYPE["note"] if lower and not on_left else 0,
            text=text,
            showarrow=False,
            font={"size": TYPE["note"], "color": "#8A3B6B"},
            bgcolor="rgba(255,255,255,0.8)",
        )
    if regions:
        legend_square(fig, band, "rgba(204, 121, 167, 0.35)")


def _mark_change(
    fig: go.Figure,
    sizes: np.ndarray,
    approx: np.ndarray,
    exact: np.ndarray,
    chosen: float,
    percent_change: bool,
    x_hover: str,
    y_hover: str,
) -> None:
    """The user's change: a dotted line, its label, and the two effects marked on it."""
    span = float(np.nanmax(sizes) - np.nanmin(sizes)) or 1.0
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


def gap_figure(
    curve: dict[str, Any],
    tolerance_pct: float,
    regressor_label: str,
    outcome_label: str,
    outcome_column: str,
    units: dict[str, str] | None = None,
) -> go.Figure:
    """Approximate and exact effect across change sizes, the gap shaded between them, the
    user's change marked, and shaded bands where the approximation misses by more than the
    tolerance. Effects are on the outcome itself (a % change or a change in its units), so the
    subtitle names the outcome, and the model's transform of it only as the model."""
    sizes, approx, exact = _arrays(curve)
    percent_change = curve["kind"] == "percent"
    percent_effect = curve["units"] == "percent"
    units = units or {}
    x_unit, y_unit = units.get(curve["column"]), units.get(outcome_column)
    x_title = html(f"Change in {curve['column']} (%)" if percent_change else "Change in " + label(curve["column"], x_unit, OWN))
    y_title = html(f"Effect on {outcome_column} (%)" if percent_effect else "Effect on " + label(outcome_column, y_unit, OWN))
    regressor_label, outcome_label, outcome_column = html(regressor_label), html(outcome_label), html(outcome_column)
    chosen = float(curve["chosen"])
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
    legend_square(fig, "Gap between them", "rgba(86, 180, 233, 0.45)")

    _tolerance_bands(fig, sizes, approx, exact, tolerance_pct)
    _mark_change(fig, sizes, approx, exact, chosen, percent_change, x_hover, y_hover)
    fig.add_hline(y=0, line={"color": "#9AA5B1", "width": 1})

    style(
        fig,
        f"How far the shortcut drifts: changing {regressor_label}",
        effect_subtitle(outcome_column, outcome_label, percent_effect, html(y_unit) if y_unit else None),
        x_title,
        y_title,
        height=580,
    )
    span = float(np.nanmax(sizes) - np.nanmin(sizes)) or 1.0
    fig.update_layout(
        xaxis={
            "range": [float(np.nanmin(sizes)) - 0.02 * span, float(np.nanmax(sizes)) + 0.02 * span],
            "ticksuffix": " %" if percent_change else "",
        },
        yaxis={"ticksuffix": " %" if percent_effect else ""},
    )
    return fig


# --- units check ----------------------------------------------------------------------------------------
def units_figure(check: dict[str, Any], outcome_column: str, tick_words: list[str]) -> go.Figure:
    """The exact effect of the same real change when the variable is recorded in other units."""
    rows = check["rows"]
    column, outcome_column = html(check["column"]), html(outcome_column)
    factors = [r["factor"] for r in rows]
    exact = floats([r["exact"] for r in rows])
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
    style(
        fig,
        title=f"Effect of {html(check['change'])} in {column}, by units",
        subtitle="A flat line would mean the units do not matter",
        x_title=f"{column} rescaled",
        y_title=y_title,
        height=500,
        legend=False,
        title_size=22,
    )
    fig.update_layout(
        xaxis={"type": "log", "tickmode": "array", "tickvals": factors, "ticktext": tick_words, "tickangle": 0},
        yaxis={"ticksuffix": " %" if percent else "", "rangemode": "tozero"},
    )
    return fig
