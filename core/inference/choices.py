"""What a loaded table allows, for the app's controls: prediction inputs, the other transforms a
column takes, zeros in an outcome, a grouping column for clustered errors, a light sample of
data points behind a curve.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd

from core.model.transforms import menu_codes, parse_transform
from core.output.numbers import round_sig, step_for


def numeric_or_none(series: pd.Series) -> pd.Series | None:
    """The column as floats when it holds numbers (or booleans), else None."""
    if pd.api.types.is_bool_dtype(series) or pd.api.types.is_numeric_dtype(series):
        return series.astype(float)
    return None


def _whole(numbers: np.ndarray) -> bool:
    """Every value a whole number; a column of fractions is told by its first thousand cells
    without a pass over a million."""
    return all(bool(np.all(np.mod(part, 1) == 0)) for part in (numbers[:1000], numbers))


def suggest_cluster(frame: pd.DataFrame) -> str | None:
    """A grouping column for clustered errors: the text or whole-number column with the most
    groups that still repeat (at most half as many groups as rows)."""
    best, best_groups = None, 0
    for name in frame.columns:
        series = frame[name]
        values = numeric_or_none(series)
        if values is not None and not _whole(values.dropna().to_numpy()):
            continue
        groups = series.nunique()
        if 2 <= groups <= len(series) // 2 and groups > best_groups:
            best, best_groups = str(name), groups
    return best


# Column names that usually count periods, most telling first (common practice, no source).
TIME_NAMES = ("time", "period", "t", "week", "month", "quarter", "year", "day", "date")


def time_columns(frame: pd.DataFrame) -> list[str]:
    """Numeric columns with at least two distinct values: what can order rows in time."""
    out = []
    for name in frame.columns:
        values = numeric_or_none(frame[name])
        if values is None:
            continue
        numbers = values.to_numpy(dtype=float, na_value=np.nan)
        numbers = numbers[~np.isnan(numbers)]
        if len(numbers) and numbers.min() < numbers.max():  # two distinct values, without hashing a million
            out.append(str(name))
    return out


def suggest_time(frame: pd.DataFrame) -> str | None:
    """A time column for the time-series errors: a numeric column named like a period (week,
    year, ...), else None."""
    by_name = {c.lower(): c for c in time_columns(frame)}
    return next((by_name[n] for n in TIME_NAMES if n in by_name), None)


# Data points drawn lightly behind an effect curve.
CURVE_POINTS = 2_000


def zero_note(frame: pd.DataFrame, column: str | None) -> dict[str, Any] | None:
    """Zeros in a numeric outcome and the rows a log would drop; None without zeros."""
    if column is None or column not in frame.columns:
        return None
    values = numeric_or_none(frame[column])
    if values is None:
        return None
    finite = values.dropna()
    zeros = int((finite == 0).sum())
    if not zeros:
        return None
    negatives = int((finite < 0).sum())
    return {
        "column": column,
        "zeros": zeros,
        "negatives": negatives,
        "dropped_by_log": zeros + negatives,
        "share": (zeros + negatives) / len(finite),
        "ppml_possible": negatives == 0,
    }


def overlay_options(frame: pd.DataFrame, column: str, current: str) -> list[str]:
    """Other transforms of ``column`` that accept all of its values, so a second curve is fitted
    on the same rows and the two can be compared."""
    values = numeric_or_none(frame[column]) if column in frame.columns else None
    if values is None:
        return []
    finite = values.dropna().to_numpy()
    out = []
    for code in [c for c in menu_codes("regressor") if c != "category"]:
        if code == current:
            continue
        bad, _ = parse_transform(code, "regressor", column).invalid(finite)
        if not bad.any():
            out.append(code)
    return out


def switch_transform(spec: dict[str, Any], column: str, transform: str) -> dict[str, Any]:
    """A copy of ``spec`` with one regressor's transform replaced (everything else kept)."""
    out = {**spec, "regressors": [dict(r) for r in spec.get("regressors") or []]}
    for entry in out["regressors"]:
        if entry["column"] == column:
            entry["transform"] = transform
    out.pop("name", None)
    return out


def sample_points(frame: pd.DataFrame, x_column: str, y_column: str, limit: int = CURVE_POINTS, seed: int = 0) -> dict[str, Any]:
    """At most ``limit`` rows (seeded, so the picture is stable) with a usable x and y."""
    x = frame[x_column]
    y = pd.to_numeric(frame[y_column], errors="coerce")
    numeric_x = numeric_or_none(x)
    usable = y.notna() & np.isfinite(y.to_numpy(dtype=float, na_value=np.nan))
    if numeric_x is not None:
        usable &= numeric_x.notna() & np.isfinite(numeric_x.to_numpy(dtype=float, na_value=np.nan))
    else:
        usable &= x.notna()
    rows = np.flatnonzero(usable.to_numpy())
    total = len(rows)
    if total > limit:
        rows = np.sort(np.random.default_rng(seed).choice(rows, size=limit, replace=False))
    xs = numeric_x.iloc[rows].to_numpy() if numeric_x is not None else x.iloc[rows].astype(str).to_numpy()
    return {"x": xs.tolist(), "y": y.iloc[rows].to_numpy().tolist(), "shown": len(rows), "total": total}


def retransforms_differ(curve: dict[str, Any], tolerance: float = 1e-6) -> bool:
    """True where the naive and the smearing curve are visibly different lines."""
    naive = np.array([np.nan if v is None else v for v in curve.get("naive") or []], dtype=float)
    smear = np.array([np.nan if v is None else v for v in curve.get("smearing") or []], dtype=float)
    if naive.size == 0 or naive.shape != smear.shape:
        return False
    with np.errstate(invalid="ignore", divide="ignore"):
        rel = np.abs(naive - smear) / np.maximum(np.abs(smear), 1e-300)
    return bool(np.nanmax(np.nan_to_num(rel, nan=0.0)) > tolerance)


# --- predict ---------------------------------------------------------------------------------------
def predict_inputs(frame: pd.DataFrame, spec: dict[str, Any], reference: dict[str, Any]) -> list[dict[str, Any]]:
    """One input per regressor: categories and 0/1 variables pick a value, numbers are typed;
    defaults are the reference point (sample mean, most frequent level)."""
    out = []
    for reg in spec.get("regressors") or []:
        column = reg["column"]
        default = reference.get(column)
        if reg.get("transform") == "category" or numeric_or_none(frame[column]) is None:
            counts = frame[column].dropna().value_counts()
            counts.index = counts.index.astype(str)
            options = sorted(counts.index.tolist(), key=lambda v: (-counts[v], v))
            out.append({"column": column, "kind": "choice", "options": options, "default": str(default)})
            continue
        values = numeric_or_none(frame[column]).dropna()
        low, high = float(values.min()), float(values.max())
        if bool(values.isin((0.0, 1.0)).all()):
            out.append(
                {"column": column, "kind": "choice", "options": [0.0, 1.0], "default": 1.0 if (default or 0) >= 0.5 else 0.0}
            )
            continue
        value = round_sig(float(default if default is not None else values.mean()))
        out.append({"column": column, "kind": "number", "default": value, "step": step_for(value), "low": low, "high": high})
    return out


def predict_spec(spec: dict[str, Any], values: dict[str, Any]) -> dict[str, Any]:
    out = {k: v for k, v in spec.items() if k != "name"}
    out["predict"] = [dict(values)]
    return out
