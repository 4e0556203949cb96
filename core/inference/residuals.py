"""Residuals and distributions for the checks view: what its charts draw, thinned for the browser.

Computed from the fitted model through ``core.analyze`` (parts ``"residuals"`` and
``"distributions"``), so they share its design, its column cache and its rows.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
from scipy import stats

from core.inference.choices import numeric_or_none
from core.inference.shape import skewness
from core.model.covariance import leverage
from core.model.design import Design
from core.model.ols import OLSFit
from core.model.transforms import parse_transform, variable_label

# --- the views' shared helpers ----------------------------------------------------------------------
# Largest number of points any chart sends to the browser (docs/contract.md §6).
MAX_POINTS = 20_000


# --- residual checks -----------------------------------------------------------------------------------
def _evenly(n: int, limit: int) -> np.ndarray:
    """Up to ``limit`` positions spread evenly over 0..n-1, both ends included."""
    if n <= limit:
        return np.arange(n)
    return np.unique(np.linspace(0, n - 1, limit).round().astype(int))


def _binned_means(x: np.ndarray, y: np.ndarray, bins: int = 30) -> tuple[list[float], list[float]]:
    """Mean of y within equal-count bins of x: a smooth trend line from every row, sent as a
    few dozen points."""
    if len(x) < 2 * bins:
        bins = max(2, len(x) // 10)
    order = np.argsort(x, kind="stable")
    groups = np.array_split(order, bins)
    xs = [float(np.mean(x[g])) for g in groups if len(g)]
    ys = [float(np.mean(y[g])) for g in groups if len(g)]
    return xs, ys


def residual_sample(design: Design, fit: OLSFit, limit: int = MAX_POINTS, seed: int = 0) -> dict[str, Any]:
    """Residuals, fitted values and what the four residual charts need, at most ``limit`` points
    each; histograms, trend lines and the Q-Q line use every row (least squares only: PPML's
    residuals are not meant to have constant spread or a normal shape).

    Standardised residuals are internally studentised, eᵢ / (s·sqrt(1 − hᵢ)) (Cook & Weisberg
    1982, Residuals and Influence in Regression, §2.2.1), with weights applied as in core.
    """
    # Room for the trend lines drawn with the dots, so a chart stays within ``limit`` points.
    limit = max(limit - 100, 10)
    root_w = np.sqrt(fit.weights) if fit.weights is not None else None
    u = fit.resid * root_w if root_w is not None else fit.resid
    X = design.X * root_w[:, None] if root_w is not None else design.X
    h = np.clip(leverage(X, fit.xtx_inv), 0.0, 1.0 - 1e-12)
    with np.errstate(divide="ignore", invalid="ignore"):
        standardised = u / (fit.sigma * np.sqrt(1.0 - h))
    n = len(u)
    rows = np.arange(n)
    if n > limit:
        rows = np.sort(np.random.default_rng(seed).choice(n, size=limit, replace=False))
    # Q-Q: the ordered standardised residuals against normal quantiles, thinned evenly by rank
    # so both tails are always drawn.
    ordered = np.sort(standardised)
    picks = _evenly(n, limit)
    theory = stats.norm.ppf((picks + 0.5) / n)
    counts, edges = np.histogram(u, bins=min(60, max(10, int(np.sqrt(n)))))
    trend_x, trend_y = _binned_means(fit.fitted, u)
    root_abs = np.sqrt(np.abs(standardised))
    spread_x, spread_y = _binned_means(fit.fitted, root_abs)
    return {
        "n": n,
        "shown": len(rows),
        "sigma": float(np.sqrt(np.mean(u * u) * n / max(n - fit.k, 1))),
        "fitted": fit.fitted[rows].tolist(),
        "resid": u[rows].tolist(),
        "root_abs": root_abs[rows].tolist(),
        "qq_theory": theory.tolist(),
        "qq_sample": ordered[picks].tolist(),
        "hist_counts": counts.tolist(),
        "hist_edges": edges.tolist(),
        "trend": {"x": trend_x, "y": trend_y},
        "spread_trend": {"x": spread_x, "y": spread_y},
    }


def _histogram(values: np.ndarray, bins: int = 40) -> dict[str, list[float]]:
    counts, edges = np.histogram(values, bins=bins)
    return {"counts": counts.tolist(), "edges": edges.tolist()}


def variable_distributions(frame: pd.DataFrame, spec: dict[str, Any]) -> list[dict[str, Any]]:
    """For the outcome and each numeric regressor: histograms of the values as recorded and as
    transformed (rows the transform cannot take left out and counted), with skewness of each."""
    entries = [(spec["outcome"]["column"], spec["outcome"].get("transform", "level"), "outcome")]
    if (spec.get("estimator") or "ols") == "ppml":
        entries[0] = (entries[0][0], "level", "outcome")
    entries += [(r["column"], r.get("transform", "level"), "regressor") for r in spec.get("regressors") or []]
    out = []
    for column, code, role in entries:
        if code == "category" or column not in frame.columns:
            continue
        values = numeric_or_none(frame[column])
        if values is None:
            continue
        raw = values.dropna().to_numpy()
        raw = raw[np.isfinite(raw)]
        if raw.size < 3 or bool(np.all((raw == 0.0) | (raw == 1.0))):
            continue
        item: dict[str, Any] = {
            "column": column,
            "zeros": int((raw == 0).sum()),
            "role": role,
            "transform": code,
            "label": variable_label(column, code, role),
            "raw": _histogram(raw),
            "skew_raw": skewness(raw),
            "transformed": None,
            "skew_transformed": None,
            "n_left_out": 0,
        }
        transform = parse_transform(code, role, column)
        if transform.code != "level" and transform.width == 1:  # a quadratic's values are x itself
            bad, _ = transform.invalid(raw)
            with np.errstate(all="ignore"):
                moved = transform.forward(raw[~bad])
            moved = moved[np.isfinite(moved)]
            if moved.size >= 3:
                item.update(transformed=_histogram(moved), skew_transformed=skewness(moved), n_left_out=int(bad.sum()))
        out.append(item)
    return out
