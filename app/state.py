"""Pure logic behind the variables grid: spec <-> grid, defaults for a new file, plain words.

No streamlit import here, so every rule the screen follows can be unit-tested. The grid is a
DataFrame with one row per data column and the columns listed in ``GRID_COLUMNS``.
"""

from __future__ import annotations

import math
import re
from typing import Any

import numpy as np
import pandas as pd

from core.transforms import parse_transform

GRID_COLUMNS = ["column", "about", "role", "transform", "change", "reference"]
ROLES = ["outcome", "regressor", "not used"]
REGRESSOR_TRANSFORMS = ["level", "log", "ihs", "shifted_log:1", "sqrt", "quadratic", "category"]
OUTCOME_TRANSFORMS = ["level", "log", "ihs", "shifted_log:1", "sqrt"]
TRANSFORM_WORDS = {
    "level": "level (as is)",
    "log": "log",
    "ihs": "IHS (asinh)",
    "shifted_log:1": "log(x + 1)",
    "sqrt": "square root",
    "quadratic": "quadratic (x and x²)",
    "category": "category (dummies)",
}
COVARIANCES = ["classical", "HC0", "HC1", "HC2", "HC3", "cluster"]
COVARIANCE_SHORT = {
    "classical": "classical",
    "HC0": "robust (HC0)",
    "HC1": "robust (HC1)",
    "HC2": "robust (HC2)",
    "HC3": "robust (HC3)",
    "cluster": "clustered",
}
COVARIANCE_WORDS = {
    "classical": "Classical (same noise in every row)",
    "HC0": "Robust, HC0",
    "HC1": "Robust, HC1 (usual choice)",
    "HC2": "Robust, HC2",
    "HC3": "Robust, HC3 (cautious in small samples)",
    "cluster": "Clustered by a grouping column",
}
# A default model on a wide file stays readable and quick; the user can add more in the grid.
MAX_DEFAULT_REGRESSORS = 12
# Text columns with more levels than this are treated as identifiers, not categories.
MAX_DEFAULT_LEVELS = 20
# Skewness above which a positive amount is logged by default (a common rule of thumb).
SKEWED = 1.0
_INDEX_NAME = re.compile(r"(^|_)(id|index|week|year|month|day|quarter|period|date|time)s?($|_)", re.IGNORECASE)


class GridError(ValueError):
    """The grid does not describe a model yet (e.g. no outcome); worded for the user."""


# --- reading a column ------------------------------------------------------------------------
def _numeric(series: pd.Series) -> pd.Series | None:
    """The column as floats when every non-missing cell is a number, else None."""
    if pd.api.types.is_bool_dtype(series):
        return series.astype(float)
    if pd.api.types.is_numeric_dtype(series):
        return series.astype(float)
    return None


def _looks_like_index(name: str, values: pd.Series) -> bool:
    """Row counters, ids and time indices make poor outcomes and regressors by default."""
    finite = values.dropna()
    if finite.empty:
        return True
    integer = bool(np.all(np.equal(np.mod(finite.to_numpy(), 1), 0)))
    if not integer:
        return False
    if _INDEX_NAME.search(name):
        return True
    distinct = finite.nunique()
    return distinct > 2 and distinct == int(finite.max() - finite.min()) + 1


def _skewness(values: pd.Series) -> float:
    skew = values.dropna().skew()
    return float(skew) if skew is not None and math.isfinite(skew) else 0.0


def compact(value: float) -> str:
    """A number in few characters for the 'about' column: 4.1, 6,383, 0.0123, 3.5e+06."""
    if not math.isfinite(value):
        return "n/a"
    magnitude = abs(value)
    if magnitude == 0:
        return "0"
    if magnitude >= 1e6 or magnitude < 1e-3:
        return f"{value:.2g}"
    if magnitude >= 1000:
        return f"{value:,.0f}"
    return f"{value:.3g}"


def describe_column(series: pd.Series) -> str:
    """What a column holds, in a few words, so the user can pick a sensible transform."""
    missing = int(series.isna().sum())
    tail = f", {missing} missing" if missing else ""
    values = _numeric(series)
    if values is None:
        levels = series.dropna().astype(str).nunique()
        return f"text, {levels} level{'s' if levels != 1 else ''}{tail}"
    finite = values.dropna()
    if finite.empty:
        return f"empty{tail}"
    if set(finite.unique()) <= {0.0, 1.0}:
        return f"0/1{tail}"
    parts = [f"{compact(float(finite.min()))} to {compact(float(finite.max()))}"]
    zeros = int((finite == 0).sum())
    negatives = int((finite < 0).sum())
    if zeros:
        parts.append(f"{zeros:,} zero{'s' if zeros != 1 else ''}")
    if negatives:
        parts.append(f"{negatives:,} negative")
    return ", ".join(parts) + tail


def suggest_transform(series: pd.Series, role: str = "regressor") -> str:
    """A first transform for a column (rules of thumb, the user can change it in the grid).

    Text -> category; 0/1 -> level; strictly positive and right-skewed -> log; non-negative
    with zeros and right-skewed -> IHS (log would drop the zero rows); otherwise level.
    """
    values = _numeric(series)
    if values is None:
        return "level" if role == "outcome" else "category"
    finite = values.dropna()
    if finite.empty or set(finite.unique()) <= {0.0, 1.0}:
        return "level"
    skewed = _skewness(finite) > SKEWED
    if skewed and (finite > 0).all():
        return "log"
    if skewed and (finite >= 0).all():
        return "ihs"
    return "level"


def _is_outcome_candidate(name: str, series: pd.Series) -> bool:
    values = _numeric(series)
    if values is None:
        return False
    finite = values.dropna()
    return bool(len(finite) > 2 and (finite > 0).all() and finite.nunique() > 2 and not _looks_like_index(name, finite))


def default_spec(frame: pd.DataFrame) -> dict[str, Any]:
    """A starting model for a newly loaded file.

    Outcome: the first strictly positive numeric column that is not a counter or time index.
    Regressors: the other numeric columns that vary, and text columns with a few levels as
    categories, up to ``MAX_DEFAULT_REGRESSORS``. Raises ``GridError`` when no column fits
    as an outcome.
    """
    names = [str(c) for c in frame.columns]
    outcome = next((c for c in names if _is_outcome_candidate(c, frame[c])), None)
    if outcome is None:
        raise GridError("the table has no numeric column with positive values to use as the outcome; check the file.")
    regressors: list[dict[str, Any]] = []
    for name in names:
        if name == outcome or len(regressors) >= MAX_DEFAULT_REGRESSORS:
            continue
        series = frame[name]
        values = _numeric(series)
        if values is None:
            levels = series.dropna().astype(str).nunique()
            if 2 <= levels <= min(MAX_DEFAULT_LEVELS, max(2, len(series) // 10)):
                regressors.append({"column": name, "transform": "category"})
            continue
        finite = values.dropna()
        if finite.nunique() < 2 or _looks_like_index(name, finite):
            continue
        regressors.append({"column": name, "transform": suggest_transform(series)})
    return {
        "outcome": {"column": outcome, "transform": suggest_transform(frame[outcome], "outcome")},
        "regressors": regressors,
        "estimator": "ols",
        "covariance": "HC1",
        "cluster": None,
        "weights": None,
        "at": {},
    }


def suggest_cluster(frame: pd.DataFrame) -> str | None:
    """A grouping column for clustered errors: the text or whole-number column with the most
    groups that still repeat (at most half as many groups as rows)."""
    best, best_groups = None, 0
    for name in frame.columns:
        series = frame[name]
        values = _numeric(series)
        if values is not None and not bool(np.all(np.equal(np.mod(values.dropna().to_numpy(), 1), 0))):
            continue
        groups = series.nunique()
        if 2 <= groups <= len(series) // 2 and groups > best_groups:
            best, best_groups = str(name), groups
    return best


# --- spec <-> grid ------------------------------------------------------------------------------
def spec_to_grid(spec: dict[str, Any], frame: pd.DataFrame) -> pd.DataFrame:
    """One grid row per data column, in the file's order, filled from ``spec``."""
    outcome = spec.get("outcome") or {}
    by_column = {r["column"]: r for r in spec.get("regressors") or []}
    # The model's own variables first (outcome, then regressors in the spec's order), so the
    # grid reads like the spec; the unused columns follow in the file's order.
    names = [str(c) for c in frame.columns]
    first = [c for c in [outcome.get("column"), *by_column] if c in names]
    rows = []
    for name in first + [c for c in names if c not in first]:
        series = frame[name]
        row = {"column": name, "about": describe_column(series), "role": "not used", "change": "", "reference": ""}
        if name == outcome.get("column"):
            row.update(role="outcome", transform=outcome.get("transform", "level"))
        elif name in by_column:
            entry = by_column[name]
            row.update(
                role="regressor",
                transform=entry.get("transform", "level"),
                change=_text(entry.get("change")),
                reference=_text(entry.get("reference")),
            )
        else:
            row["transform"] = suggest_transform(series)
        rows.append(row)
    return pd.DataFrame(rows, columns=GRID_COLUMNS).astype(object)


def _text(value: Any) -> str:
    """A grid cell as stripped text; blank for None, NaN and pandas' missing markers."""
    if value is None:
        return ""
    try:
        if pd.isna(value):
            return ""
    except (TypeError, ValueError):
        pass
    return str(value).strip()


def _switch_ends(change: str) -> tuple[str, str] | None:
    if "->" not in change:
        return None
    start, end = (part.strip() for part in change.split("->", 1))
    return start, end


def _is_number(text: str) -> bool:
    try:
        return math.isfinite(float(text))
    except ValueError:
        return False


def grid_to_spec(
    grid: pd.DataFrame,
    covariance: str = "HC1",
    cluster: str | None = None,
    at: dict[str, Any] | None = None,
) -> tuple[dict[str, Any], list[str]]:
    """The spec the grid describes, plus notes on cells that were set aside.

    Raises ``GridError`` unless exactly one row is the outcome, or when the outcome has a
    regressor-only transform. Everything else (columns, transforms, change text) is checked
    by ``core`` so the rules live in one place.
    """
    outcomes = [r for r in grid.to_dict("records") if _text(r.get("role")) == "outcome"]
    if not outcomes:
        raise GridError("no outcome chosen: set the role of one column to 'outcome'.")
    if len(outcomes) > 1:
        names = ", ".join(_text(r["column"]) for r in outcomes)
        raise GridError(f"more than one outcome ({names}): keep exactly one row with the role 'outcome'.")
    outcome = outcomes[0]
    outcome_transform = _text(outcome.get("transform")) or "level"
    if outcome_transform in ("quadratic", "category"):
        raise GridError(
            f"the outcome '{_text(outcome['column'])}' cannot be '{outcome_transform}'; "
            f"use one of: {', '.join(OUTCOME_TRANSFORMS)}."
        )
    notes: list[str] = []
    regressors: list[dict[str, Any]] = []
    for row in grid.to_dict("records"):
        if _text(row.get("role")) != "regressor":
            continue
        column = _text(row["column"])
        transform = _text(row.get("transform")) or "level"
        entry: dict[str, Any] = {"column": column, "transform": transform}
        change = _text(row.get("change"))
        if transform == "category":
            reference = _text(row.get("reference"))
            if reference:
                entry["reference"] = reference
            ends = _switch_ends(change)
            # core reads number-like ends ('0->1') as numbers, which then do not match the
            # text levels of a category; every level is compared with the reference instead.
            if ends and not any(_is_number(e) for e in ends):
                entry["change"] = change
            elif change:
                notes.append(
                    f"'{column}' is a category, so its effects compare every level with the reference level; "
                    f"the change '{change}' was set aside (write two level names, e.g. 'A->B', to pick one pair)."
                )
        elif change:
            entry["change"] = change
        regressors.append(entry)
    used = {r["column"] for r in regressors}
    spec: dict[str, Any] = {
        "outcome": {"column": _text(outcome["column"]), "transform": outcome_transform},
        "regressors": regressors,
        "estimator": "ols",
        "covariance": covariance,
        "cluster": cluster if covariance == "cluster" else None,
        "weights": None,
        "at": {k: v for k, v in (at or {}).items() if k in used},
    }
    return spec, notes


def resolve_outcome(grid: pd.DataFrame, previous: pd.DataFrame) -> pd.DataFrame:
    """When an edit makes a second row the outcome, the new choice wins and the old outcome
    becomes 'not used', so the user can switch outcome with one click."""
    is_outcome = grid["role"].map(_text) == "outcome"
    if is_outcome.sum() <= 1:
        return grid
    before = dict(zip(previous["column"].map(_text), previous["role"].map(_text), strict=False))
    new = [i for i in grid.index[is_outcome] if before.get(_text(grid.at[i, "column"])) != "outcome"]
    keep = new[-1] if new else grid.index[is_outcome][-1]
    resolved = grid.copy()
    for i in grid.index[is_outcome]:
        if i != keep:
            resolved.at[i, "role"] = "not used"
    if resolved.at[keep, "transform"] not in OUTCOME_TRANSFORMS:
        resolved.at[keep, "transform"] = "level"
    return resolved


def category_levels(frame: pd.DataFrame, grid: pd.DataFrame, limit: int = 12) -> dict[str, list[str]]:
    """Levels of the columns used as categories, so the user can type a reference level."""
    out: dict[str, list[str]] = {}
    for row in grid.to_dict("records"):
        if _text(row.get("transform")) == "category" and _text(row.get("role")) == "regressor":
            column = _text(row["column"])
            if column in frame.columns:
                counts = frame[column].dropna().astype(str).value_counts()
                out[column] = counts.index[:limit].tolist() + (["…"] if len(counts) > limit else [])
    return out


# --- plain words -------------------------------------------------------------------------------
def variable_label(column: str, transform: str | None, role: str = "regressor") -> str:
    """Short plain name of a transformed variable: 'log of drink_price', 'IHS of ad_spend',
    'log(visits + 1)', 'region (categories)'; the bare name for levels."""
    code = (transform or "level").strip()
    if code == "level":
        return column
    if code in ("log", "ihs", "sqrt"):
        word = {"log": "log", "ihs": "IHS", "sqrt": "square root"}[code]
        return f"{word} of {column}"
    if code.startswith("shifted_log:"):
        return f"log({column} + {code.split(':', 1)[1]})"
    if code == "quadratic":
        return f"{column} and its square"
    if code == "category":
        return f"{column} (categories)"
    try:
        return parse_transform(code, role, column).label(column)
    except ValueError:
        return f"{code} of {column}"


def join_words(items: list[str]) -> str:
    if len(items) <= 1:
        return "".join(items)
    return ", ".join(items[:-1]) + " and " + items[-1]


def model_sentence(result: dict[str, Any]) -> str:
    """'log of weekly_revenue explained by log of drink_price, ... and region (categories)'."""
    outcome = result["outcome"]
    y = variable_label(outcome["column"], outcome["transform"], "outcome")
    seen: dict[str, str] = {}
    for term in result.get("terms") or []:
        if term["column"] and term["column"] not in seen:
            seen[term["column"]] = variable_label(term["column"], term["transform"])
    if not seen:
        return f"{y} with no regressors (a mean only)"
    return f"{y} explained by {join_words(list(seen.values()))}"


def rows_sentence(result: dict[str, Any]) -> str:
    used = result.get("n_obs", 0)
    dropped = result.get("n_dropped", 0)
    return f"{used:,} rows used, {dropped:,} dropped"


def fit_sentence(result: dict[str, Any]) -> str:
    """' · R² 0.714 on the log scale, 0.703 for weekly_revenue itself' (empty without a fit).

    R² of a transformed outcome measures the transformed scale; the original-scale R²
    (squared correlation of y with the retransformed prediction) is the one that compares
    across outcome transforms, so both are named.
    """
    fit = result.get("fit") or {}
    r2 = fit.get("r2")
    if r2 is None:
        return ""
    outcome = result["outcome"]
    if outcome["transform"] == "level":
        return f" · R² {r2:.3f}"
    text = f" · R² {r2:.3f} for {variable_label(outcome['column'], outcome['transform'], 'outcome')}"
    original = fit.get("r2_original_scale")
    if original is not None:
        text += f", {original:.3f} for {outcome['column']} itself"
    return text


def dropped_lines(result: dict[str, Any]) -> list[str]:
    """One line per reason rows were left out, naming the column."""
    return [f"{d['count']:,} row(s): {d['reason']} in '{d['column']}'" for d in result.get("dropped") or []]


def sentence_case(text: str) -> str:
    return text[:1].upper() + text[1:] if text else text
