"""Effect curves: the predicted outcome on its original scale across a regressor."""

from __future__ import annotations

from typing import Any

import numpy as np
import plotly.graph_objects as go

from app.charts.base import (
    BEYOND_NAME,
    BLUE,
    GREEN,
    GREY,
    ORANGE,
    PURPLE,
    SHADE,
    SKY,
    VERMILLION,
    floats,
    legend_dot,
    legend_square,
    style,
)
from core.output import unit_words
from core.output.escape import html
from core.output.theme import NAIVE_NAME, SMEARING_NAME

# --- effect curves ---------------------------------------------------------------------------------------


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


def rows_off_the_axis(fig: go.Figure, points: dict[str, Any] | None) -> tuple[int, int, float]:
    """How many of the drawn data rows lie below and above the y axis's range (``_y_range``
    stops at the 1st and 99th percentiles), and the highest of them, for the caption."""
    if not points or not points.get("y") or fig.layout.yaxis.range is None:
        return 0, 0, float("nan")
    y = np.array([np.nan if v is None else float(v) for v in points["y"]], dtype=float)
    low, high = fig.layout.yaxis.range
    return int(np.sum(y < low)), int(np.sum(y > high)), float(np.nanmax(y)) if np.isfinite(y).any() else float("nan")


def _data_points(fig: go.Figure, points: dict[str, Any] | None, column: str, outcome_column: str) -> np.ndarray:
    """The data as faint grey dots behind the curve (a sample when large); their y values."""
    pts_y = np.array([], dtype=float)
    if points and points.get("x"):
        pts_y = floats(points["y"])
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
        legend_dot(fig, "Data rows" + (" (a sample)" if points["shown"] < points["total"] else ""), GREY)
    return pts_y


def _shade_beyond(fig: go.Figure, x_low: float, x_high: float, observed_min: float, observed_max: float) -> None:
    """Grey strips where the curve runs beyond the observed values, named in the legend."""
    shaded = False
    for left, right in ((x_low, observed_min), (observed_max, x_high)):
        if right - left <= 1e-12 * max(1.0, abs(right)):
            continue
        fig.add_vrect(x0=left, x1=right, fillcolor=SHADE, opacity=0.16, line_width=0, layer="below")
        shaded = True
    if shaded:
        # Named in the legend rather than written in the strips: a strip can be too narrow
        # for a label on a half-slide export.
        legend_square(fig, BEYOND_NAME, "rgba(154, 165, 177, 0.35)")


def _comparison_lines(
    fig: go.Figure,
    x: np.ndarray,
    naive: np.ndarray,
    column: str,
    observed_min: float,
    overlay: dict[str, Any] | None,
    overlay_label: str | None,
    show_naive: bool,
) -> list[np.ndarray]:
    """The naive retransform (dashed) and another transform's curve (dash-dot), when shown;
    their y values, for the axis range."""
    extra: list[np.ndarray] = []
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
        extra.append(naive)
    if overlay is not None:
        ox = floats(overlay["x"])
        oy = floats(overlay["smearing"])
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
        extra.append(oy[okeep])
    return extra


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
    units: dict[str, str] | None = None,
) -> go.Figure:
    """The predicted outcome on its original scale across one regressor's range (others at the
    reference point): the CI band, the smearing and the naive retransform, a light sample of the
    data, the stretches beyond the observed data shaded, and optionally the smearing curve of
    another transform of the same regressor."""
    units = units or {}
    y_title = html(unit_words.label(outcome_column, units.get(outcome_column), "original units"))
    x_title = html(unit_words.label(curve["column"], units.get(curve["column"]), "as recorded"))
    regressor_label, outcome_column, outcome_label = html(regressor_label), html(outcome_column), html(outcome_label)
    if curve["kind"] == "levels":
        return _levels_figure(curve, regressor_label, outcome_column, outcome_label, points, show_naive, ppml, y_title)
    column = html(curve["column"])
    x = floats(curve["x"])
    smear, naive = floats(curve["smearing"]), floats(curve["naive"])
    low, high = floats(curve["ci_low"]), floats(curve["ci_high"])
    observed_min, observed_max = float(curve["observed_min"]), float(curve["observed_max"])
    # A variable that is never negative is not drawn below zero, even where its transform allows it.
    keep = x >= 0 if observed_min >= 0 else np.ones_like(x, dtype=bool)
    x, smear, naive, low, high = (a[keep] for a in (x, smear, naive, low, high))

    fig = go.Figure()
    pts_y = _data_points(fig, points, column, outcome_column)
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
    curves += _comparison_lines(fig, x, naive, column, observed_min, overlay, overlay_label, show_naive)
    x_low, x_high = float(np.nanmin(x)), float(np.nanmax(x))
    _shade_beyond(fig, x_low, x_high, observed_min, observed_max)

    y_low, y_high = _y_range(curves, pts_y)
    style(
        fig,
        title=f"Predicted {outcome_column} as {column} varies",
        subtitle=f"{_model_words(outcome_label, ppml)} on {regressor_label} and other regressors, these held at their reference values",
        x_title=x_title,
        y_title=y_title,
        height=660,
    )
    fig.update_layout(
        xaxis={"range": [x_low - 0.01 * (x_high - x_low), x_high + 0.01 * (x_high - x_low)]},
        yaxis={"range": [y_low, y_high]},
    )
    return fig


def _level_points(fig: go.Figure, points: dict[str, Any] | None, levels: list[str], outcome_column: str) -> np.ndarray:
    """The data as a light jittered strip at each level; their y values."""
    if not (points and points.get("x")):
        return np.array([], dtype=float)
    labels = [str(v) if not isinstance(v, float) else f"{v:g}" for v in points["x"]]
    where = {lv: i for i, lv in enumerate(levels)}
    pairs = [(where[lv], y) for lv, y in zip(labels, points["y"], strict=True) if lv in where]
    if not pairs:
        return np.array([], dtype=float)
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
    legend_dot(fig, "Data rows" + (" (a sample)" if points["shown"] < points["total"] else ""), GREY)
    return pts_y


def _levels_figure(
    curve: dict[str, Any],
    regressor_label: str,
    outcome_column: str,
    outcome_label: str,
    points: dict[str, Any] | None,
    show_naive: bool,
    ppml: bool,
    y_title: str,
) -> go.Figure:
    """Categories and 0/1 variables: one point per level with its 95 % interval as error bars,
    the data as a light jittered strip behind."""
    column = html(curve["column"])
    levels = [str(v) if not isinstance(v, float) else f"{v:g}" for v in curve["x"]]
    ticks = [html(f"{lv} (reference)" if i == 0 and len(levels) > 2 else lv) for i, lv in enumerate(levels)]
    positions = np.arange(len(levels), dtype=float)
    smear, naive = floats(curve["smearing"]), floats(curve["naive"])
    low, high = floats(curve["ci_low"]), floats(curve["ci_high"])
    fig = go.Figure()
    pts_y = _level_points(fig, points, levels, outcome_column)
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
    style(
        fig,
        title=f"Predicted {outcome_column} by {column}",
        subtitle=f"{_model_words(outcome_label, ppml)} on {regressor_label} and other regressors, these held at their reference values",
        x_title=column,
        y_title=y_title,
        height=640,
    )
    fig.update_layout(
        xaxis={"tickmode": "array", "tickvals": positions.tolist(), "ticktext": ticks, "range": [-0.6, len(levels) - 0.4]},
        yaxis={"range": [y_low, y_high]},
    )
    return fig


# --- one curve per value of a moderator ----------------------------------------------------------------
# Okabe–Ito colours in a fixed order, with dash patterns, so groups read apart in greyscale too.
GROUP_LOOKS = [
    (BLUE, "solid"),
    (VERMILLION, "dash"),
    (GREEN, "dot"),
    (PURPLE, "dashdot"),
    (ORANGE, "longdash"),
    (SKY, "longdashdot"),
]


def _band_colour(colour: str, alpha: float = 0.16) -> str:
    red, green, blue = (int(colour.lstrip("#")[i : i + 2], 16) for i in (0, 2, 4))
    return f"rgba({red}, {green}, {blue}, {alpha})"


def group_curves_figure(
    curves: list[dict[str, Any]],
    group_names: list[str],
    *,
    regressor_label: str,
    moderator: str,
    outcome_column: str,
    outcome_label: str,
    ppml: bool = False,
    units: dict[str, str] | None = None,
) -> go.Figure:
    """The expected outcome across one regressor, one curve (with its 95 % band) per value of the
    moderator it is crossed with; for a category or 0/1 regressor one marker per level and group."""
    units = units or {}
    first = curves[0]
    column, moderator = html(first["column"]), html(moderator)
    y_title = html(unit_words.label(outcome_column, units.get(outcome_column), "original units"))
    fig = go.Figure()
    values: list[np.ndarray] = []
    levels = first["kind"] == "levels"
    for i, (curve, name) in enumerate(zip(curves, group_names, strict=True)):
        colour, dash = GROUP_LOOKS[i % len(GROUP_LOOKS)]
        x, smear = floats(curve["x"]) if not levels else np.arange(len(curve["x"])), floats(curve["smearing"])
        low, high = floats(curve["ci_low"]), floats(curve["ci_high"])
        values += [smear, low, high]
        if levels:
            offset = (i - (len(curves) - 1) / 2) * min(0.6 / len(curves), 0.15)
            fig.add_trace(
                go.Scatter(
                    x=x + offset,
                    y=smear,
                    mode="markers",
                    name=html(name),
                    marker={"color": colour, "size": 12, "symbol": i % 12, "line": {"color": "white", "width": 1}},
                    error_y={"type": "data", "symmetric": False, "array": high - smear, "arrayminus": smear - low},
                    hovertemplate=f"{html(name)}<br>%{{y:,.4g}}<extra></extra>",
                )
            )
            continue
        fig.add_trace(go.Scatter(x=x, y=high, mode="lines", line={"width": 0}, showlegend=False, hoverinfo="skip"))
        fig.add_trace(
            go.Scatter(
                x=x, y=low, mode="lines", line={"width": 0}, fill="tonexty", fillcolor=_band_colour(colour),
                showlegend=False, hoverinfo="skip",
            )
        )  # fmt: skip
        fig.add_trace(
            go.Scatter(
                x=x,
                y=smear,
                mode="lines",
                name=html(name),
                line={"color": colour, "width": 3, "dash": dash},
                hovertemplate=f"{html(name)}<br>{column} %{{x:.4g}}<br>expected %{{y:,.4g}}<extra></extra>",
            )
        )
    if not levels:
        x = floats(first["x"])
        _shade_beyond(fig, float(np.nanmin(x)), float(np.nanmax(x)), float(first["observed_min"]), float(first["observed_max"]))
    y_low, y_high = _y_range(values, np.array([], dtype=float))
    style(
        fig,
        title=f"Predicted {html(outcome_column)} as {column} varies, by {moderator}",
        subtitle=f"{_model_words(html(outcome_label), ppml)} on {html(regressor_label)} crossed with {moderator}; "
        "other regressors at their reference values; shaded bands: 95 % confidence",
        x_title=html(unit_words.label(first["column"], units.get(first["column"]), "as recorded")),
        y_title=y_title,
        height=660,
    )
    fig.update_layout(yaxis={"range": [y_low, y_high]})
    if levels:
        ticks = [html(str(v)) for v in first["x"]]
        fig.update_layout(xaxis={"tickmode": "array", "tickvals": list(range(len(ticks))), "ticktext": ticks})
    return fig
