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
from core.inference.diagnostics import sample_rows
from core.inference.shape import skewness
from core.model.covariance import leverage
from core.model.design import Design
from core.model.ols import OLSFit
from core.model.transforms import parse_transform, variable_label

# --- the views' shared helpers ----------------------------------------------------------------------
# Largest number of points any chart sends to the browser (docs/contract.md §6).
MAX_POINTS = 20_000
# Dots behind the residual checks' bands (which use every row): three charts of 20,000 dots each
# took the browser about 3 s to draw at 1,000,000 rows; with 5,000 a redraw of the view took
# 1.03 s and with 2,500 0.71 s (bench/browser.py's table, one run each), and the bands carry
# the shape either way.
RESIDUAL_POINTS = 2_500


# --- residual checks -----------------------------------------------------------------------------------
def _bands(order: np.ndarray, count: int, min_rows: int) -> list[np.ndarray]:
    """Row positions in up to ``count`` bands of equal size (within one row) and at least
    ``min_rows`` rows where the data allow, from the lowest fitted value to the highest;
    ``order`` is the rows sorted by fitted value (one stable sort for both kinds of band)."""
    count = max(1, min(count, len(order) // min_rows))
    return [g for g in np.array_split(order, count) if len(g)]


def _spread_bands(fitted: np.ndarray, u: np.ndarray, order: np.ndarray, count: int = 10) -> list[dict[str, float]]:
    """The residuals of each band of fitted values by their 10th, 25th, 50th, 75th and 90th
    percentiles: an even spread gives bands of one height."""
    out = []
    for rows in _bands(order, count, 10):
        q10, q25, q50, q75, q90 = np.percentile(u[rows], [10, 25, 50, 75, 90])
        f = fitted[rows]
        out.append(
            {"low": float(f.min()), "high": float(f.max()), "mid": float(np.median(f)), "n": int(len(rows)),
             "q10": float(q10), "q25": float(q25), "q50": float(q50), "q75": float(q75), "q90": float(q90)}
        )  # fmt: skip
    return out


def _mean_bands(fitted: np.ndarray, u: np.ndarray, order: np.ndarray, count: int = 20) -> list[dict[str, float]]:
    """The mean residual of each band of fitted values with its 95 % interval (t interval from
    the band's own spread): a model that misses a curve leaves bands whose mean is off zero."""
    out = []
    for rows in _bands(order, count, 15):
        values = u[rows]
        mean = float(values.mean())
        half = 0.0
        if len(values) > 1:
            half = float(stats.t.ppf(0.975, len(values) - 1) * values.std(ddof=1) / np.sqrt(len(values)))
        out.append(
            {"mid": float(np.median(fitted[rows])), "n": int(len(rows)), "mean": mean, "low": mean - half, "high": mean + half}
        )
    return out


# Distances from zero, in standard deviations, at which the tails are compared with a normal curve.
TAIL_POINTS = (1.0, 2.0, 3.0)


def _tails(standardised: np.ndarray) -> list[dict[str, Any]]:
    """Share of rows beyond ±1, ±2 and ±3 standardised units on each side, with its 95 % Wilson
    interval (Wilson 1927, JASA 22, 209-212), beside the share a normal curve puts there."""
    finite = standardised[np.isfinite(standardised)]
    n = max(len(finite), 1)
    z = float(stats.norm.ppf(0.975))
    out = []
    for side, sign in (("above", 1.0), ("below", -1.0)):
        for point in TAIL_POINTS:
            count = int(np.sum(sign * finite > point))
            share = count / n
            centre = (share + z * z / (2 * n)) / (1 + z * z / n)
            half = z * np.sqrt(share * (1 - share) / n + z * z / (4 * n * n)) / (1 + z * z / n)
            out.append(
                {"side": side, "point": point, "count": count, "share": share, "normal_share": float(stats.norm.sf(point)),
                 "low": float(max(centre - half, 0.0)), "high": float(min(centre + half, 1.0))}
            )  # fmt: skip
    return out


def _stable_order(x: np.ndarray) -> np.ndarray:
    """``np.argsort(x, kind="stable")`` (ties in row order): where x has no ties every sort gives
    that order, and numpy's default one is about three times as fast on a million values (30 ms
    against 95 ms); values with ties, seen in a first sorted stretch or in the whole, take the
    stable sort itself."""
    head = np.sort(x[:2048])
    if len(x) < 2 or (head[1:] == head[:-1]).any():
        return np.argsort(x, kind="stable")
    order = np.argsort(x)
    ordered = x[order]
    return order if not (ordered[1:] == ordered[:-1]).any() else np.argsort(x, kind="stable")


def residual_sample(
    design: Design, fit: OLSFit, limit: int = RESIDUAL_POINTS, seed: int = 0, h: np.ndarray | None = None
) -> dict[str, Any]:
    """What the residual checks draw: a sample of at most ``limit`` rows (fitted value and
    residual), and from every row the spread and the mean residual in bands of fitted values and
    the tails of the standardised residuals (least squares only: PPML's residuals are not meant
    to have constant spread or a normal shape).

    Standardised residuals are internally studentised, eᵢ / (s·sqrt(1 − hᵢ)) (Cook & Weisberg
    1982, Residuals and Influence in Regression, §2.2.1), with weights applied as in core.
    ``h``, the rows' leverage (``core.model.covariance.leverage`` with the weights), when the
    caller has it.
    """
    # Room for the bands drawn with the dots (two outlines of six points and a median per band),
    # so a chart stays within ``limit`` points.
    limit = max(limit - 200, 10)
    root_w = np.sqrt(fit.weights) if fit.weights is not None else None
    u = fit.resid * root_w if root_w is not None else fit.resid
    if h is None:
        h = leverage(design.X, fit.xtx_inv, fit.weights)
    if design.absorbed is not None:
        h = h + design.absorbed.leverage(fit.weights)
    h = np.clip(h, 0.0, 1.0 - 1e-12)
    with np.errstate(divide="ignore", invalid="ignore"):
        standardised = u / (fit.sigma * np.sqrt(1.0 - h))
    n = len(u)
    rows = np.arange(n)
    if n > limit:
        rows = sample_rows(n, limit, seed)
    q10, q25, q75, q90 = np.percentile(u, [10, 25, 75, 90])
    order = _stable_order(fit.fitted)
    return {
        "n": n,
        "shown": len(rows),
        "sigma": float(np.sqrt(np.mean(u * u) * n / max(fit.df_resid, 1))),
        "fitted": fit.fitted[rows].tolist(),
        "resid": u[rows].tolist(),
        "spread_all": {"q10": float(q10), "q25": float(q25), "q75": float(q75), "q90": float(q90)},
        "spread_bands": _spread_bands(fit.fitted, u, order),
        "mean_bands": _mean_bands(fit.fitted, u, order),
        "tails": _tails(standardised),
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
